/**
 * WAL checkpoints in a worker thread. With synchronous=FULL a checkpoint copies the WAL into the
 * database file and fsyncs it; done by SQLite's automatic checkpoint it would stall the thread that
 * commits ingest. Here a second connection in a worker runs PASSIVE checkpoints every few hundred
 * ms (they never block writers), and the main connection's automatic checkpoint is turned off.
 */
import { createRequire } from 'node:module';
import { Worker } from 'node:worker_threads';

const WORKER_CODE = `
const { parentPort, workerData } = require('node:worker_threads');
const Database = require(workerData.sqlitePath);
const db = new Database(workerData.file);
db.pragma('busy_timeout = 5000');
db.pragma('synchronous = FULL');
let timer = setInterval(() => {
  try { db.pragma('wal_checkpoint(PASSIVE)'); } catch (e) { parentPort.postMessage({ error: String(e && e.message || e) }); }
}, workerData.everyMs);
parentPort.on('message', (m) => {
  if (m !== 'stop') return;
  clearInterval(timer);
  try { db.pragma('wal_checkpoint(PASSIVE)'); } catch {}
  db.close();
  parentPort.postMessage({ stopped: true });
});
`;

export interface Checkpointer {
  stop(): Promise<void>;
}

export function startCheckpointer(file: string, everyMs: number, onError: (message: string) => void): Checkpointer {
  const sqlitePath = createRequire(import.meta.url).resolve('better-sqlite3');
  const w = new Worker(WORKER_CODE, { eval: true, workerData: { file, everyMs, sqlitePath } });
  w.unref();
  let stopped: Promise<void> | null = null;
  w.on('message', (m: { error?: string }) => {
    if (m.error) onError(m.error);
  });
  w.on('error', (e) => onError(e.message));
  return {
    stop() {
      stopped ??= new Promise<void>((resolve) => {
        const t = setTimeout(() => void w.terminate().then(() => resolve()), 5000);
        w.once('exit', () => {
          clearTimeout(t);
          resolve();
        });
        w.on('message', (m: { stopped?: boolean }) => {
          if (m.stopped) void w.terminate();
        });
        w.postMessage('stop');
      });
      return stopped;
    },
  };
}
