/** A private Eclipse Mosquitto broker for a test: free loopback port, temp config allowing anonymous clients. */
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import mqtt from 'mqtt';

export const mosquittoPath = ['/usr/sbin/mosquitto', '/usr/bin/mosquitto'].find((p) => spawnSync('test', ['-x', p]).status === 0) ?? null;

export function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const s = createServer();
    s.once('error', reject);
    s.listen(0, '127.0.0.1', () => {
      const port = (s.address() as { port: number }).port;
      s.close(() => resolve(port));
    });
  });
}

export interface Broker {
  url: string;
  process: ChildProcess;
  stop(): void;
}

export async function startMosquitto(): Promise<Broker> {
  if (!mosquittoPath) throw new Error('mosquitto is not installed (apt-get install mosquitto)');
  const dir = mkdtempSync(join(tmpdir(), 'tideline-mosquitto-'));
  const port = await freePort();
  const conf = join(dir, 'mosquitto.conf');
  writeFileSync(conf, `listener ${port} 127.0.0.1\nallow_anonymous true\npersistence false\nlog_dest stderr\nlog_type error\n`);
  const proc = spawn(mosquittoPath, ['-c', conf], { stdio: ['ignore', 'ignore', 'pipe'] });
  const url = `mqtt://127.0.0.1:${port}`;
  const ok = await new Promise<boolean>((resolve) => {
    const end = Date.now() + 10_000;
    const attempt = () => {
      const c = mqtt.connect(url, { reconnectPeriod: 0, connectTimeout: 1000 });
      c.once('connect', () => c.end(true, () => resolve(true)));
      c.once('error', () => {
        c.end(true);
        if (Date.now() > end) resolve(false);
        else setTimeout(attempt, 100);
      });
    };
    attempt();
  });
  if (!ok) {
    proc.kill('SIGKILL');
    throw new Error(`mosquitto did not accept connections on ${url}`);
  }
  return { url, process: proc, stop: () => void proc.kill('SIGTERM') };
}
