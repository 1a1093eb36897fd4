/** The running server with tls.cert/tls.key configured: https for the API, wss for /ingest, Secure cookies. */
import { describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { mkdtempSync, readFileSync } from 'node:fs';
import https from 'node:https';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { WebSocket } from 'ws';
import { startServer } from '../../server/app.ts';
import { loadConfig } from '../../server/config.ts';
import { ensureDemoAdministrator } from '../../server/auth/demo-admin.ts';

function request(url: string, ca: Buffer, method = 'GET', body?: string): Promise<{ status: number; headers: import('node:http').IncomingHttpHeaders; text: string }> {
  return new Promise((resolve, reject) => {
    const req = https.request(url, { method, ca, headers: body ? { 'content-type': 'application/json' } : {} }, (res) => {
      let text = '';
      res.on('data', (c) => (text += c));
      res.on('end', () => resolve({ status: res.statusCode ?? 0, headers: res.headers, text }));
    });
    req.on('error', reject);
    req.end(body);
  });
}

describe('server over TLS', () => {
  it('serves https and wss, marks cookies Secure and sends HSTS', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'tideline-tls-srv-'));
    const cert = join(dir, 'cert.pem');
    const key = join(dir, 'key.pem');
    execFileSync('openssl', ['req', '-x509', '-newkey', 'ec', '-pkeyopt', 'ec_paramgen_curve:prime256v1', '-nodes', '-keyout', key, '-out', cert, '-days', '2', '-subj', '/CN=127.0.0.1', '-addext', 'subjectAltName=IP:127.0.0.1'], { stdio: 'ignore' });
    const ca = readFileSync(cert);
    const config = loadConfig({ overrides: { host: '127.0.0.1', port: 0, dataDir: dir, webDir: null, logLevel: 'silent', auth: { scryptLog2N: 12 }, tls: { cert, key } } });
    const srv = await startServer(config);
    try {
      const base = `https://127.0.0.1:${srv.port}`;
      const demo = await ensureDemoAdministrator(srv.ctx);
      const login = await request(base + '/api/auth/login', ca, 'POST', JSON.stringify({ name: demo.name, password: demo.password }));
      expect(login.status).toBe(200);
      const cookies = login.headers['set-cookie'] ?? [];
      expect(cookies.find((c) => c.startsWith('tideline_session='))).toMatch(/; Secure/);
      expect(login.headers['strict-transport-security']).toMatch(/max-age=/);
      const token = (await srv.ctx.auth!.createAnalyzerToken('nir-tls', 'tls test', 'test')).token;
      const opened = await new Promise<boolean>((resolve) => {
        const ws = new WebSocket(`wss://127.0.0.1:${srv.port}/ingest`, { ca, headers: { authorization: `Bearer ${token}` } });
        ws.on('open', () => {
          ws.close();
          resolve(true);
        });
        ws.on('error', () => resolve(false));
      });
      expect(opened).toBe(true);
      // plain http on the TLS port is not served
      await expect(fetch(`http://127.0.0.1:${srv.port}/api/info`).then((r) => r.status)).rejects.toThrow();
    } finally {
      await srv.close();
    }
  });
});
