/**
 * Ingest group commits in a worker thread. better-sqlite3 is synchronous: done on the main thread,
 * every commit (statement work, result JSON, and the fsync of synchronous=FULL) stalls monitoring
 * and the sockets. Here a second connection in a worker runs the same transaction while the main
 * thread goes on judging the next spectra; the caller awaits the reply, so an ack still goes out
 * only after the commit that holds the spectrum and its result is durable.
 *
 * The worker runs plain JavaScript (eval), like the checkpointer, so it works under tsx, vitest and
 * plain node alike. The SQL texts come from the caller so both paths write the same rows.
 */
import { createRequire } from 'node:module';
import { Worker } from 'node:worker_threads';
import type { IngestWrite } from './storage.ts';

/** SQL of the ingest transaction (shared by the inline and the worker path). */
export const INGEST_SQL = {
  insertBatch: `INSERT INTO batches (id, unit, analyzer, boot, product, status, start_seq, start_t, axis, model_version, created_at)
        VALUES (?, ?, ?, ?, ?, 'open', ?, ?, ?, ?, ?)`,
  insertRejected: 'INSERT OR IGNORE INTO rejected_entries (analyzer, boot, seq, code, message, received_at) VALUES (?, ?, ?, ?, ?, ?)',
  insertSpectrum: 'INSERT INTO spectra (batch, idx, analyzer, boot, seq, t, vals, received_at) VALUES (?, ?, ?, ?, ?, ?, ?, ?)',
  insertResult: 'INSERT OR REPLACE INTO results (batch, idx, seq, t, model_version, t2, q, body, quality) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)',
  batchProgress: 'UPDATE batches SET spectrum_count = ?, last_seq = ?, last_t = ?, endpoint_state = ?, endpoint_at = ? WHERE id = ?',
  batchEnd: `UPDATE batches SET status = 'ended', end_seq = ?, end_t = ?, end_reason = ? WHERE id = ?`,
  upsertAlarm: `INSERT INTO alarms (id, unit, batch, kind, key, state, priority, message, value, limit_value, active, raised_at, cleared_at,
          acknowledged_at, acknowledged_by, ack_comment, shelved_until, shelved_by, shelve_reason, seq, updated_at, suppressed_by,
          raised_spectrum_t, spectrum_t)
        VALUES (@id, @unit, @batch, @kind, @key, @state, @priority, @message, @value, @limit, @active, @raisedAt, @clearedAt,
          @acknowledgedAt, @acknowledgedBy, @acknowledgeComment, @shelvedUntil, @shelvedBy, @shelveReason, @seq, @updatedAt, @suppressedBy,
          @raisedSpectrumT, @spectrumT)
        ON CONFLICT (id) DO UPDATE SET state = excluded.state, priority = excluded.priority, message = excluded.message,
          value = excluded.value, limit_value = excluded.limit_value, active = excluded.active, cleared_at = excluded.cleared_at,
          acknowledged_at = excluded.acknowledged_at, acknowledged_by = excluded.acknowledged_by, ack_comment = excluded.ack_comment,
          shelved_until = excluded.shelved_until, shelved_by = excluded.shelved_by, shelve_reason = excluded.shelve_reason,
          seq = excluded.seq, updated_at = excluded.updated_at, suppressed_by = excluded.suppressed_by,
          raised_spectrum_t = excluded.raised_spectrum_t, spectrum_t = excluded.spectrum_t`,
  insertAnalyzerStatus: `INSERT INTO analyzer_status (analyzer, boot, seq, t, status, code, detail, unit, received_at)
        VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)`,
  insertEndpointEvent: `INSERT INTO endpoint_events (id, unit, batch, from_state, to_state, t, seq, reason, recorded_at)
        VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)`,
  insertOutbox: 'INSERT INTO outbox (id, unit, unit_seq, type, payload, created_at) VALUES (?, ?, ?, ?, ?, ?)',
  insertLabValue: `INSERT INTO lab_values (id, batch, property, value, unit, sample_t, spectrum_idx, spectrum_dt_ms, method, entered_by, entered_at, source, supersedes, reason)
        VALUES (@id, @batch, @property, @value, @unit, @sampleT, @spectrumIdx, @spectrumDtMs, @method, @enteredBy, @enteredAt, @source, @supersedes, @reason)`,
  insertShadowBatch: 'INSERT OR IGNORE INTO shadow_batches (run, batch) VALUES (?, ?)',
  insertShadowResult: 'INSERT OR REPLACE INTO shadow_results (run, batch, idx, seq, t, t2, q, body) VALUES (?, ?, ?, ?, ?, ?, ?, ?)',
  bootSeq: 'UPDATE analyzer_boots SET last_seq = MAX(last_seq, ?), last_seen = ? WHERE analyzer = ? AND boot = ?',
} as const;

const WORKER_CODE = `
const { parentPort, workerData } = require('node:worker_threads');
const Database = require(workerData.sqlitePath);
const db = new Database(workerData.file);
db.pragma('journal_mode = WAL');
db.pragma('synchronous = ' + workerData.synchronous);
db.pragma('foreign_keys = ON');
db.pragma('busy_timeout = 5000');
if (workerData.noAutoCheckpoint) db.pragma('wal_autocheckpoint = 0');
const s = {};
for (const [k, sql] of Object.entries(workerData.sql)) s[k] = db.prepare(sql);
const blob = (a) => Buffer.from(a.buffer, a.byteOffset, a.byteLength);
const commit = db.transaction((w) => {
  for (const b of w.batchStarts) s.insertBatch.run(b.id, b.unit, b.analyzer, b.boot, b.product, b.startSeq, b.startT, blob(Float64Array.from(b.axis)), b.modelVersion, b.createdAt);
  for (const r of w.rejected) s.insertRejected.run(r.analyzer, r.boot, r.seq, r.code, r.message, r.receivedAt);
  for (const x of w.spectra) s.insertSpectrum.run(x.batch, x.idx, x.analyzer, x.boot, x.seq, x.t, blob(x.values), x.receivedAt);
  for (const v of (w.labValues || [])) s.insertLabValue.run(v);
  for (const r of w.results) s.insertResult.run(r.batch, r.idx, r.result.seq, r.result.t, r.modelVersion, r.result.t2, r.result.q, JSON.stringify(r.result), r.result.quality ? JSON.stringify(r.result.quality) : null);
  for (const x of (w.shadowBatches || [])) s.insertShadowBatch.run(x.run, x.batch);
  for (const r of (w.shadowResults || [])) s.insertShadowResult.run(r.run, r.batch, r.idx, r.result.seq, r.result.t, Number.isFinite(r.result.t2) ? r.result.t2 : null, Number.isFinite(r.result.q) ? r.result.q : null, JSON.stringify(r.result));
  for (const p of w.batchProgress) s.batchProgress.run(p.spectrumCount, p.lastSeq, p.lastT, p.endpointState, p.endpointAt, p.batch);
  for (const e of w.batchEnds) s.batchEnd.run(e.endSeq, e.endT, e.endReason, e.batch);
  for (const x of (w.analyzerStatus || [])) s.insertAnalyzerStatus.run(x.analyzer, x.boot, x.seq, x.t, x.status, x.code, x.detail, x.unit, x.receivedAt);
  for (const a of w.alarms) s.upsertAlarm.run({ ...a, active: a.active ? 1 : 0, suppressedBy: (a.suppressedBy || []).join(','), raisedSpectrumT: a.raisedSpectrumT ?? null, spectrumT: a.spectrumT ?? null });
  for (const e of w.endpointEvents) s.insertEndpointEvent.run(e.id, e.unit, e.batch, e.from, e.to, e.t, e.seq, e.reason, e.recordedAt);
  for (const o of w.outbox) s.insertOutbox.run(o.id, o.unit, o.unitSeq, o.type, JSON.stringify(o.payload), o.createdAt);
  for (const b of w.boots) s.bootSeq.run(b.lastSeq, b.lastSeen, b.analyzer, b.boot);
});
parentPort.on('message', (m) => {
  if (m === 'stop') {
    db.close();
    parentPort.postMessage({ stopped: true });
    return;
  }
  try {
    commit(m.w);
    parentPort.postMessage({ id: m.id });
  } catch (e) {
    parentPort.postMessage({ id: m.id, error: String((e && e.message) || e) });
  }
});
parentPort.postMessage({ ready: true });
`;

export interface IngestWriter {
  /** Resolves once the transaction holding `w` is committed (durable with synchronous=FULL). */
  commit(w: IngestWrite): Promise<void>;
  stop(): Promise<void>;
}

/** `noAutoCheckpoint`: WAL checkpoints are run by the checkpointer worker, not by this connection's commits. */
export function startIngestWriter(file: string, synchronous: 'FULL' | 'NORMAL' | 'OFF', noAutoCheckpoint: boolean): IngestWriter {
  const sqlitePath = createRequire(import.meta.url).resolve('better-sqlite3');
  const w = new Worker(WORKER_CODE, { eval: true, workerData: { file, synchronous, sqlitePath, sql: INGEST_SQL, noAutoCheckpoint } });
  const pending = new Map<number, { resolve: () => void; reject: (e: Error) => void }>();
  let nextId = 1;
  let failed: Error | null = null;
  let stopped: Promise<void> | null = null;
  const failAll = (e: Error) => {
    failed = e;
    for (const p of pending.values()) p.reject(e);
    pending.clear();
  };
  w.on('message', (m: { id?: number; error?: string }) => {
    if (m.id === undefined) return;
    const p = pending.get(m.id);
    if (!p) return;
    pending.delete(m.id);
    if (pending.size === 0) w.unref();
    if (m.error !== undefined) p.reject(new Error(`ingest commit failed: ${m.error}`));
    else p.resolve();
  });
  w.on('error', (e) => failAll(new Error(`ingest writer thread failed: ${e.message}`)));
  w.on('exit', (code) => failAll(new Error(`ingest writer thread exited (${code})`)));
  // Idle between commits: do not keep the process alive on its own account.
  w.unref();
  return {
    commit(write: IngestWrite) {
      if (failed) return Promise.reject(failed);
      if (stopped) return Promise.reject(new Error('ingest writer is stopped'));
      const id = nextId++;
      return new Promise<void>((resolve, reject) => {
        if (pending.size === 0) w.ref(); // a commit in flight keeps the process alive until it is answered
        pending.set(id, { resolve, reject });
        w.postMessage({ id, w: write });
      });
    },
    stop() {
      stopped ??= new Promise<void>((resolve) => {
        if (failed) {
          void w.terminate().then(() => resolve());
          return;
        }
        w.ref();
        const t = setTimeout(() => void w.terminate().then(() => resolve()), 5000);
        w.once('exit', () => {
          clearTimeout(t);
          resolve();
        });
        w.on('message', (m: { stopped?: boolean }) => {
          if (m.stopped) void w.terminate();
        });
        // Messages are handled in order: every commit posted before this one finishes first.
        w.postMessage('stop');
      });
      return stopped;
    },
  };
}
