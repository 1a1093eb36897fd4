/**
 * SIGTERM stops a server with MQTT configured while the broker is not there, or is there but has
 * gone silent (accepts the connection, never acknowledges a publish). Before, the retained
 * 'offline' publish and mqtt.js's wait for in-flight PUBACKs had no bound, so the process could
 * hang until the broker came back. The server runs as a site runs it (`tideline serve`).
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import net from 'node:net';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';

const ROOT = resolve(import.meta.dirname, '../..');
const procs: ChildProcess[] = [];
afterAll(() => {
  for (const p of procs) if (p.exitCode === null && p.signalCode === null) p.kill('SIGKILL');
});

async function freePort(): Promise<number> {
  const s = net.createServer();
  await new Promise<void>((r) => s.listen(0, '127.0.0.1', r));
  const port = (s.address() as net.AddressInfo).port;
  await new Promise<void>((r) => s.close(() => r()));
  return port;
}

/** Start `tideline serve` with the given MQTT URL; resolves once it says it is running. */
async function serve(mqttUrl: string): Promise<{ proc: ChildProcess; out: () => string }> {
  const dir = mkdtempSync(join(tmpdir(), 'tideline-mqtt-stop-'));
  const cfg = join(dir, 'tideline.json');
  writeFileSync(cfg, JSON.stringify({ units: [{ id: 'dryer-1', kind: 'dryer' }], signals: { mqtt: { url: mqttUrl, publishTimeoutMs: 60_000 } } }));
  const proc = spawn(process.execPath, ['--import', 'tsx', 'server/cli.ts', 'serve', '--config', cfg, '--data-dir', dir, '--port', '0', '--web-dir', 'none'], {
    cwd: ROOT,
    stdio: ['ignore', 'pipe', 'pipe'],
    env: { ...process.env, TIDELINE_LOG_LEVEL: 'warn' },
  });
  procs.push(proc);
  let out = '';
  proc.stdout!.on('data', (d: Buffer) => (out += d.toString()));
  proc.stderr!.on('data', (d: Buffer) => (out += d.toString()));
  await new Promise<void>((ok, fail) => {
    const t = setInterval(() => {
      if (/Tideline is running at/.test(out)) (clearInterval(t), ok());
    }, 50);
    proc.once('exit', (c) => (clearInterval(t), fail(new Error(`serve exited with ${c}:\n${out}`))));
  });
  return { proc, out: () => out };
}

function exited(p: ChildProcess): Promise<number | null> {
  return new Promise((r) => (p.exitCode !== null ? r(p.exitCode) : p.once('exit', (c) => r(c))));
}

describe('SIGTERM with MQTT configured and the broker down', () => {
  it('stops cleanly when no broker listens at the configured address', async () => {
    const port = await freePort();
    const s = await serve(`mqtt://127.0.0.1:${port}`);
    s.proc.kill('SIGTERM');
    expect(await exited(s.proc)).toBe(0);
    expect(s.out()).not.toMatch(/did not finish/);
  }, 120_000);

  it('stops cleanly when the broker accepts the connection but never acknowledges a publish', async () => {
    // A broker gone silent: answers CONNECT with CONNACK (MQTT 3.1.1, section 3.2), then reads and ignores everything.
    let published = 0;
    let connected!: () => void;
    const sawPublish = new Promise<void>((r) => (connected = r));
    const sockets = new Set<net.Socket>();
    const broker = net.createServer((sock) => {
      sockets.add(sock);
      sock.on('error', () => undefined);
      sock.on('data', (d) => {
        const type = d[0]! >> 4;
        if (type === 1) sock.write(Buffer.from([0x20, 0x02, 0x00, 0x00]));
        if (type === 3 || d.includes(0x30) || d.includes(0x32)) {
          published++;
          connected();
        }
      });
    });
    await new Promise<void>((r) => broker.listen(0, '127.0.0.1', r));
    const port = (broker.address() as net.AddressInfo).port;
    try {
      const s = await serve(`mqtt://127.0.0.1:${port}`);
      await sawPublish; // the retained 'online' status (QoS 1) is in flight and never acknowledged
      expect(published).toBeGreaterThan(0);
      s.proc.kill('SIGTERM');
      expect(await exited(s.proc)).toBe(0);
      expect(s.out()).not.toMatch(/did not finish/);
    } finally {
      for (const sock of sockets) sock.destroy();
      await new Promise<void>((r) => broker.close(() => r()));
    }
  }, 120_000);
});
