import { describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import https from 'node:https';
import type { AddressInfo } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { WebSocket, WebSocketServer } from 'ws';
import { createWebServer, schemes } from '../../server/auth/tls.ts';
import { readSecurityConfig } from '../../server/auth/security-config.ts';

function selfSigned(): { cert: string; key: string; dir: string } {
  const dir = mkdtempSync(join(tmpdir(), 'tideline-tls-'));
  const cert = join(dir, 'cert.pem');
  const key = join(dir, 'key.pem');
  execFileSync('openssl', ['req', '-x509', '-newkey', 'ec', '-pkeyopt', 'ec_paramgen_curve:prime256v1', '-nodes', '-keyout', key, '-out', cert, '-days', '2', '-subj', '/CN=localhost', '-addext', 'subjectAltName=IP:127.0.0.1,DNS:localhost'], { stdio: 'ignore' });
  return { cert, key, dir };
}

describe('TLS', () => {
  it('serves https and wss with a configured certificate and key', async () => {
    const { cert, key } = selfSigned();
    const tls = readSecurityConfig({ tls: { cert, key } }).tls;
    expect(schemes(tls)).toEqual({ http: 'https', ws: 'wss' });
    const server = createWebServer((_req, res) => res.end('hello over tls'), tls);
    const wss = new WebSocketServer({ server });
    wss.on('connection', (ws) => ws.send('hi over wss'));
    await new Promise<void>((r) => server.listen(0, '127.0.0.1', () => r()));
    const port = (server.address() as AddressInfo).port;
    const ca = execFileSync('cat', [cert]);
    const body = await new Promise<{ text: string; protocol: string }>((resolve, reject) => {
      https
        .get({ host: '127.0.0.1', port, path: '/', ca }, (res) => {
          let t = '';
          const protocol = (res.socket as import('node:tls').TLSSocket).getProtocol() ?? '';
          res.on('data', (c) => (t += c));
          res.on('end', () => resolve({ text: t, protocol }));
        })
        .on('error', reject);
    });
    expect(body.text).toBe('hello over tls');
    expect(['TLSv1.2', 'TLSv1.3']).toContain(body.protocol);
    const msg = await new Promise<string>((resolve, reject) => {
      const ws = new WebSocket(`wss://127.0.0.1:${port}/live`, { ca });
      ws.on('message', (m) => {
        resolve(String(m));
        ws.close();
      });
      ws.on('error', reject);
    });
    expect(msg).toBe('hi over wss');
    // a client that does not trust the certificate is refused
    await expect(
      new Promise((resolve, reject) => https.get({ host: '127.0.0.1', port, path: '/' }, resolve).on('error', reject)),
    ).rejects.toThrow(/self.signed|certificate/i);
    wss.close();
    await new Promise((r) => server.close(r));
  });

  it('names the bad file when the certificate or key cannot be used', () => {
    const { dir, key } = selfSigned();
    const notPem = join(dir, 'x.txt');
    writeFileSync(notPem, 'not a certificate');
    expect(() => createWebServer(() => {}, { cert: join(dir, 'missing.pem'), key })).toThrow(/tls\.cert: cannot read .*missing\.pem/);
    expect(() => createWebServer(() => {}, { cert: notPem, key })).toThrow(/tls\.cert: .*x\.txt is not a PEM file/);
    expect(() => readSecurityConfig({ tls: { cert: 'a' } })).toThrow(/configuration tls: key/);
    expect(readSecurityConfig({}).tls).toBeNull();
  });
});
