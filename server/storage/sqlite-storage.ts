/**
 * SQLite implementation of the storage interface (better-sqlite3 12, WAL, synchronous=FULL).
 * Commits are durable when they return: GMP records must survive a power cut.
 */
import Database from 'better-sqlite3';
import { chmodSync, existsSync, mkdirSync } from 'node:fs';
import { dirname } from 'node:path';
import type { Alarm, EvaluationResult } from '../../core/api/rest.ts';
import { checkLabValueAdditions } from '../../core/lab/lab-values.ts';
import type { MonitorResult } from '../../core/monitor/types.ts';
import { migrate } from './migrate.ts';
import { checkDatabaseFile, describeOpenError } from './open-check.ts';
import { startCheckpointer, type Checkpointer } from './checkpointer.ts';
import { INGEST_SQL, startIngestWriter, type IngestWriter } from './ingest-writer.ts';
import type { AnalyzerTokenRepository, LoginFailureRepository, ModelApprovalRepository, SessionRepository, SpectrumSourceRef, UnitOfWork, UserRepository } from './repositories.ts';
import { SqliteAuditRepository } from './sqlite-audit.ts';
import { SqliteSignatureRepository } from './sqlite-signatures.ts';
import { SqliteSignalRepository } from './sqlite-signals.ts';
import { SqliteModelLifeRepository } from './sqlite-model-life.ts';
import { sqliteAuthRepositories } from './sqlite-auth.ts';
import type {
  AlarmFilter,
  AnalyzerBootRow,
  AnalyzerRow,
  BatchFilter,
  BatchRow,
  DeploymentRow,
  EndpointEventRow,
  IngestWrite,
  LabValueRow,
  ModelVersionRow,
  OutboxRow,
  SpectrumRow,
  Storage,
  StoredEntry,
  StreamPositionRepair,
  UnitRow,
} from './storage.ts';

type Row = Record<string, any>;

function f64Blob(a: ArrayLike<number>): Buffer {
  const f = Float64Array.from(a);
  return Buffer.from(f.buffer, f.byteOffset, f.byteLength);
}
function blobF64(b: Buffer): Float64Array {
  const out = new Float64Array(b.byteLength / 8);
  new Uint8Array(out.buffer).set(b);
  return out;
}
function f32Blob(a: Float32Array): Buffer {
  return Buffer.from(a.buffer, a.byteOffset, a.byteLength);
}
function blobF32(b: Buffer): Float32Array {
  const out = new Float32Array(b.byteLength / 4);
  new Uint8Array(out.buffer).set(b);
  return out;
}

function batchFromRow(r: Row): BatchRow {
  return {
    id: r.id, unit: r.unit, analyzer: r.analyzer, boot: r.boot, product: r.product, status: r.status,
    startSeq: r.start_seq, startT: r.start_t, endSeq: r.end_seq, endT: r.end_t, endReason: r.end_reason,
    axis: blobF64(r.axis), modelVersion: r.model_version, spectrumCount: r.spectrum_count,
    lastSeq: r.last_seq, lastT: r.last_t, endpointState: r.endpoint_state, endpointAt: r.endpoint_at, createdAt: r.created_at,
  };
}
function modelFromRow(r: Row): ModelVersionRow {
  return {
    id: r.id, name: r.name, version: r.version, product: r.product, sha256: r.sha256, body: r.body,
    settings: JSON.parse(r.settings), referenceBatches: JSON.parse(r.reference_batches), components: r.components,
    confidence: r.confidence, status: r.status, createdAt: r.created_at, createdBy: r.created_by,
    approvedAt: r.approved_at, approvedBy: r.approved_by, approvalReason: r.approval_reason,
    retiredAt: r.retired_at, retiredBy: r.retired_by, retireReason: r.retire_reason,
  };
}
function alarmFromRow(r: Row): Alarm {
  return {
    id: r.id, unit: r.unit, batch: r.batch, kind: r.kind, key: r.key, state: r.state, priority: r.priority,
    message: r.message, value: r.value, limit: r.limit_value, active: r.active === 1, raisedAt: r.raised_at,
    clearedAt: r.cleared_at, acknowledgedAt: r.acknowledged_at, acknowledgedBy: r.acknowledged_by,
    acknowledgeComment: r.ack_comment, shelvedUntil: r.shelved_until, shelvedBy: r.shelved_by,
    shelveReason: r.shelve_reason, seq: r.seq, updatedAt: r.updated_at,
    raisedSpectrumT: r.raised_spectrum_t ?? null, spectrumT: r.spectrum_t ?? null,
    suppressedBy: r.suppressed_by ? (String(r.suppressed_by).split(',') as Alarm['suppressedBy']) : [],
  };
}
function labValueFromRow(r: Row): LabValueRow {
  return {
    id: r.id, batch: r.batch, property: r.property, value: r.value, unit: r.unit, sampleT: r.sample_t, spectrumIdx: r.spectrum_idx,
    spectrumDtMs: r.spectrum_dt_ms, method: r.method, enteredBy: r.entered_by, enteredAt: r.entered_at, source: r.source,
    supersedes: r.supersedes, reason: r.reason,
  };
}
function deploymentFromRow(r: Row): DeploymentRow {
  return { id: r.id, unit: r.unit, modelVersion: r.model_version, deployedAt: r.deployed_at, deployedBy: r.deployed_by, reason: r.reason, endedAt: r.ended_at };
}

export interface SqliteOptions {
  /** File path, or ':memory:'. */
  file: string;
  /** Defaults to FULL (durable). */
  synchronous?: 'FULL' | 'NORMAL' | 'OFF';
  /** Run WAL checkpoints in a worker thread (default true for files); else SQLite's automatic ones. */
  checkpointInWorker?: boolean;
  /**
   * Run ingest group commits in a worker thread with its own connection, so that monitoring on the
   * main thread and the commit's fsync can overlap (files only; ':memory:' always commits inline).
   * Off by default: on the shared, loaded 2-core bench machine (load average 6-9) it measured slower
   * than inline commits in 3 of 4 alternating runs and used more server CPU (structured clone of
   * every write, a second connection); it may pay on an otherwise idle machine.
   */
  ingestInWorker?: boolean;
  onError?: (message: string) => void;
}

export class SqliteStorage implements Storage {
  /** The connection, for this folder's other SQLite repositories and for tests; not part of Storage. */
  readonly db: Database.Database;
  readonly audit: SqliteAuditRepository;
  readonly signatures: SqliteSignatureRepository;
  readonly signals: SqliteSignalRepository;
  readonly modelLife: SqliteModelLifeRepository;
  readonly users: UserRepository;
  readonly sessions: SessionRepository;
  readonly loginFailures: LoginFailureRepository;
  readonly analyzerTokens: AnalyzerTokenRepository;
  private readonly models: ModelApprovalRepository;
  private readonly uow: UnitOfWork;
  /** The tail of the queue of units of work (they run one after another on the one connection). */
  private uowTail: Promise<unknown> = Promise.resolve();
  private readonly st: Record<string, Database.Statement>;
  private readonly commitTx: (w: IngestWrite) => void;
  private readonly addLabTx: Database.Transaction<(rows: LabValueRow[]) => void>;
  private checkpointer: Checkpointer | null = null;
  private writer: IngestWriter | null = null;

  constructor(opts: SqliteOptions) {
    const fresh = opts.file !== ':memory:' && !existsSync(opts.file);
    if (opts.file !== ':memory:') {
      // The database holds password and token hashes and the audit trail: a folder Tideline
      // creates is the service user's only (0700), and so is a new database file (0600; SQLite
      // gives its -wal and -shm files the database's mode).
      mkdirSync(dirname(opts.file), { recursive: true, mode: 0o700 });
      checkDatabaseFile(opts.file);
    }
    try {
      this.db = new Database(opts.file);
      if (fresh) chmodSync(opts.file, 0o600);
    } catch (e) {
      throw describeOpenError(opts.file, e);
    }
    try {
      this.db.pragma('busy_timeout = 5000');
      this.db.pragma(`synchronous = ${opts.synchronous ?? 'FULL'}`);
      this.db.pragma('foreign_keys = ON');
      // migrate() checks the database before writing anything; WAL mode (which rewrites the
      // header) is set only on a database that passed.
      migrate(this.db, undefined, opts.file);
      this.db.pragma('journal_mode = WAL');
    } catch (e) {
      this.db.close();
      throw describeOpenError(opts.file, e);
    }
    if (opts.file !== ':memory:' && opts.checkpointInWorker !== false) {
      this.db.pragma('wal_autocheckpoint = 0');
      this.db.pragma('journal_size_limit = 67108864');
      this.checkpointer = startCheckpointer(opts.file, 250, (m) => {
        (opts.onError ?? ((x: string) => process.stderr.write(`WAL checkpoint: ${x}\n`)))(m);
      });
    }
    if (opts.file !== ':memory:' && opts.ingestInWorker === true) {
      this.writer = startIngestWriter(opts.file, opts.synchronous ?? 'FULL', this.checkpointer !== null);
    }
    const p = (sql: string) => this.db.prepare(sql);
    this.st = {
      insertUnit: p('INSERT INTO units (id, name, kind, description, created_at) VALUES (?, ?, ?, ?, ?)'),
      getUnit: p('SELECT * FROM units WHERE id = ?'),
      listUnits: p('SELECT * FROM units ORDER BY id'),
      insertAnalyzer: p('INSERT INTO analyzers (id, name, created_at) VALUES (?, ?, ?)'),
      getAnalyzer: p('SELECT * FROM analyzers WHERE id = ?'),
      listAnalyzers: p('SELECT * FROM analyzers ORDER BY id'),
      upsertBoot: p(`INSERT INTO analyzer_boots (analyzer, boot, axis, instrument, first_seen, last_seen) VALUES (?, ?, ?, ?, ?, ?)
        ON CONFLICT (analyzer, boot) DO UPDATE SET last_seen = excluded.last_seen, instrument = excluded.instrument`),
      getBoot: p('SELECT * FROM analyzer_boots WHERE analyzer = ? AND boot = ?'),
      latestBoot: p('SELECT * FROM analyzer_boots WHERE analyzer = ? ORDER BY last_seen DESC, boot DESC LIMIT 1'),
      bootSeq: p(INGEST_SQL.bootSeq),
      insertBatch: p(INGEST_SQL.insertBatch),
      insertRejected: p(INGEST_SQL.insertRejected),
      batchIds: p('SELECT id FROM batches'),
      insertSpectrum: p(INGEST_SQL.insertSpectrum),
      insertResult: p(INGEST_SQL.insertResult),
      insertShadowBatch: p(INGEST_SQL.insertShadowBatch),
      insertShadowResult: p(INGEST_SQL.insertShadowResult),
      batchProgress: p(INGEST_SQL.batchProgress),
      batchEnd: p(INGEST_SQL.batchEnd),
      upsertAlarm: p(INGEST_SQL.upsertAlarm),
      insertEndpointEvent: p(INGEST_SQL.insertEndpointEvent),
      insertOutbox: p(INGEST_SQL.insertOutbox),
      insertAnalyzerStatus: p(INGEST_SQL.insertAnalyzerStatus),
      latestStatuses: p(`SELECT s.* FROM analyzer_status s JOIN (SELECT analyzer, MAX(id) AS id FROM analyzer_status GROUP BY analyzer) m ON s.id = m.id`),
      lastUnits: p(`SELECT analyzer, unit FROM batches b WHERE start_t = (SELECT MAX(start_t) FROM batches c WHERE c.analyzer = b.analyzer)`),
      maxOutbox: p('SELECT unit, MAX(unit_seq) AS m FROM outbox GROUP BY unit'),
      getBatch: p('SELECT * FROM batches WHERE id = ?'),
      openBatches: p(`SELECT * FROM batches WHERE status = 'open' ORDER BY start_t`),
      readSpectra: p('SELECT batch, idx, seq, t, vals FROM spectra WHERE batch = ? AND seq >= ? AND seq <= ? ORDER BY idx LIMIT ?'),
      pageSpectra: p('SELECT batch, idx, seq, t, vals FROM spectra WHERE batch = ? AND idx >= ? ORDER BY idx LIMIT ?'),
      spectrumBySeq: p('SELECT batch, idx, seq, t, vals FROM spectra WHERE batch = ? AND seq = ?'),
      readResults: p('SELECT body FROM results WHERE batch = ? AND seq >= ? AND seq <= ? ORDER BY idx LIMIT ?'),
      lastResult: p('SELECT body FROM results WHERE batch = ? ORDER BY idx DESC LIMIT 1'),
      resultCount: p('SELECT COUNT(*) AS n FROM results WHERE batch = ?'),
      scanCounts: p(`SELECT COALESCE(SUM(json_extract(body, '$.suspect') = 1), 0) AS suspect, COALESCE(SUM(json_extract(quality, '$.judged') = 0), 0) AS unjudged, COUNT(*) AS n
        FROM results WHERE batch = ?`),
      nextVersion: p('SELECT COALESCE(MAX(version), 0) + 1 AS v FROM model_versions WHERE name = ?'),
      insertModel: p(`INSERT INTO model_versions (id, name, version, product, sha256, body, settings, reference_batches, components, confidence,
          status, created_at, created_by) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, 'draft', ?, ?)`),
      getModel: p('SELECT * FROM model_versions WHERE id = ?'),
      listModels: p('SELECT * FROM model_versions ORDER BY name, version'),
      approveModel: p(`UPDATE model_versions SET status = 'approved', approved_at = ?, approved_by = ?, approval_reason = ? WHERE id = ? AND status = 'draft'`),
      retireModel: p(`UPDATE model_versions SET status = 'retired', retired_at = ?, retired_by = ?, retire_reason = ? WHERE id = ? AND status != 'retired'`),
      insertEval: p('INSERT INTO model_evaluations (id, model_version, created_at, created_by, body) VALUES (?, ?, ?, ?, ?)'),
      listEvals: p('SELECT body FROM model_evaluations WHERE model_version = ? ORDER BY created_at'),
      endUnitDeployments: p('UPDATE deployments SET ended_at = ? WHERE unit = ? AND ended_at IS NULL'),
      insertDeployment: p('INSERT INTO deployments (id, unit, model_version, deployed_at, deployed_by, reason) VALUES (?, ?, ?, ?, ?, ?)'),
      activeDeployment: p('SELECT * FROM deployments WHERE unit = ? AND ended_at IS NULL ORDER BY deployed_at DESC LIMIT 1'),
      endModelDeployments: p('UPDATE deployments SET ended_at = ? WHERE model_version = ? AND ended_at IS NULL'),
      getAlarm: p('SELECT * FROM alarms WHERE id = ?'),
      liveAlarms: p(`SELECT * FROM alarms WHERE state != 'normal' OR shelved_until IS NOT NULL OR (active = 1 AND suppressed_by != '')`),
      endpointEvents: p('SELECT * FROM endpoint_events WHERE batch = ? ORDER BY t, seq'),
      insertLabValue: p(INGEST_SQL.insertLabValue),
      labValues: p('SELECT * FROM lab_values WHERE batch = ? ORDER BY rowid'),
      spectrumTimes: p('SELECT t FROM spectra WHERE batch = ? ORDER BY idx'),
    };
    const s = this.st;
    this.commitTx = this.db.transaction((w: IngestWrite) => {
      for (const b of w.batchStarts) {
        s.insertBatch.run(b.id, b.unit, b.analyzer, b.boot, b.product, b.startSeq, b.startT, f64Blob(b.axis), b.modelVersion, b.createdAt);
      }
      for (const r of w.rejected) s.insertRejected.run(r.analyzer, r.boot, r.seq, r.code, r.message, r.receivedAt);
      for (const x of w.spectra) s.insertSpectrum.run(x.batch, x.idx, x.analyzer, x.boot, x.seq, x.t, f32Blob(x.values), x.receivedAt);
      for (const v of w.labValues ?? []) s.insertLabValue.run(v);
      for (const r of w.results) {
        s.insertResult.run(r.batch, r.idx, r.result.seq, r.result.t, r.modelVersion, r.result.t2, r.result.q, JSON.stringify(r.result), r.result.quality ? JSON.stringify(r.result.quality) : null);
      }
      for (const x of w.shadowBatches ?? []) s.insertShadowBatch.run(x.run, x.batch);
      for (const r of w.shadowResults ?? []) s.insertShadowResult.run(r.run, r.batch, r.idx, r.result.seq, r.result.t, Number.isFinite(r.result.t2) ? r.result.t2 : null, Number.isFinite(r.result.q) ? r.result.q : null, JSON.stringify(r.result));
      for (const p of w.batchProgress) s.batchProgress.run(p.spectrumCount, p.lastSeq, p.lastT, p.endpointState, p.endpointAt, p.batch);
      for (const e of w.batchEnds) s.batchEnd.run(e.endSeq, e.endT, e.endReason, e.batch);
      for (const x of w.analyzerStatus) s.insertAnalyzerStatus.run(x.analyzer, x.boot, x.seq, x.t, x.status, x.code, x.detail, x.unit, x.receivedAt);
      for (const a of w.alarms) s.upsertAlarm.run(alarmParams(a));
      for (const e of w.endpointEvents) s.insertEndpointEvent.run(e.id, e.unit, e.batch, e.from, e.to, e.t, e.seq, e.reason, e.recordedAt);
      for (const o of w.outbox) s.insertOutbox.run(o.id, o.unit, o.unitSeq, o.type, JSON.stringify(o.payload), o.createdAt);
      for (const b of w.boots) s.bootSeq.run(b.lastSeq, b.lastSeen, b.analyzer, b.boot);
    });
    this.addLabTx = this.db.transaction((rows: LabValueRow[]) => {
      const existing: LabValueRow[] = [];
      for (const b of new Set(rows.map((r) => r.batch))) existing.push(...(s.labValues.all(b) as Row[]).map(labValueFromRow));
      checkLabValueAdditions(existing, rows);
      for (const v of rows) s.insertLabValue.run(v);
    });
    this.audit = new SqliteAuditRepository(this.db);
    this.models = {
      approve: async (id, by, at, reason) => this.approveModelVersionSync(id, by, at, reason),
      retire: async (id, by, at, reason) => this.retireModelVersionSync(id, by, at, reason),
      deploy: async (d) => this.deploySync(d),
    };
    this.signatures = new SqliteSignatureRepository(this.db);
    this.signals = new SqliteSignalRepository(this.db);
    this.modelLife = new SqliteModelLifeRepository(this.db);
    const auth = sqliteAuthRepositories(this.db);
    this.users = auth.users;
    this.sessions = auth.sessions;
    this.loginFailures = auth.loginFailures;
    this.analyzerTokens = auth.analyzerTokens;
    this.uow = { audit: this.audit, signatures: this.signatures, models: this.models, modelLife: this.modelLife, ...auth };
  }

  /**
   * One transaction (BEGIN IMMEDIATE … COMMIT) around `work`; units queue behind one another. The
   * repositories answer synchronously, so the work runs to its end within one turn of the event
   * loop and nothing else writes on the connection meanwhile; a unit that yields to the event loop
   * (awaits real I/O) is rolled back and refused, since other writes could have joined it.
   */
  unitOfWork<T>(work: (uow: UnitOfWork) => Promise<T>): Promise<T> {
    const run = async (): Promise<T> => {
      if (this.db.inTransaction) throw new Error('a unit of work cannot start inside another SQLite transaction');
      this.db.exec('BEGIN IMMEDIATE');
      let yielded = false;
      const guard = setImmediate(() => {
        yielded = true;
      });
      try {
        const out = await work(this.uow);
        if (yielded) throw new Error('a unit of work awaited something outside its repositories (I/O): rolled back, since other writes could have joined its transaction');
        this.db.exec('COMMIT');
        return out;
      } catch (e) {
        if (this.db.inTransaction) this.db.exec('ROLLBACK');
        throw e;
      } finally {
        clearImmediate(guard);
      }
    };
    const p = this.uowTail.then(run, run);
    this.uowTail = p.catch(() => undefined);
    return p;
  }

  async close(): Promise<void> {
    if (this.writer) await this.writer.stop();
    this.writer = null;
    if (this.checkpointer) await this.checkpointer.stop();
    this.checkpointer = null;
    if (this.db.open) {
      try {
        this.db.pragma('wal_checkpoint(PASSIVE)');
      } catch {
        /* another connection may hold it; the WAL stays valid */
      }
      this.db.close();
    }
  }

  async createUnit(u: UnitRow) {
    this.st.insertUnit.run(u.id, u.name, u.kind, u.description, u.createdAt);
  }
  async getUnit(id: string) {
    const r = this.st.getUnit.get(id) as Row | undefined;
    return r ? { id: r.id, name: r.name, kind: r.kind, description: r.description, createdAt: r.created_at } : null;
  }
  async listUnits() {
    return (this.st.listUnits.all() as Row[]).map((r) => ({ id: r.id, name: r.name, kind: r.kind, description: r.description, createdAt: r.created_at }));
  }
  async createAnalyzer(a: AnalyzerRow) {
    this.st.insertAnalyzer.run(a.id, a.name, a.createdAt);
  }
  async getAnalyzer(id: string) {
    const r = this.st.getAnalyzer.get(id) as Row | undefined;
    return r ? { id: r.id, name: r.name, createdAt: r.created_at } : null;
  }
  async listAnalyzers() {
    return (this.st.listAnalyzers.all() as Row[]).map((r) => ({ id: r.id, name: r.name, createdAt: r.created_at }));
  }
  async upsertAnalyzerBoot(b: Omit<AnalyzerBootRow, 'lastSeq'>) {
    this.st.upsertBoot.run(b.analyzer, b.boot, f64Blob(b.axis), b.instrument, b.firstSeen, b.lastSeen);
    return (await this.getAnalyzerBoot(b.analyzer, b.boot))!;
  }
  async getAnalyzerBoot(analyzer: string, boot: number) {
    const r = this.st.getBoot.get(analyzer, boot) as Row | undefined;
    return r ? bootFromRow(r) : null;
  }
  async latestAnalyzerBoot(analyzer: string) {
    const r = this.st.latestBoot.get(analyzer) as Row | undefined;
    return r ? bootFromRow(r) : null;
  }

  async repairStreamPositions(): Promise<StreamPositionRepair[]> {
    const bad = this.db
      .prepare(`SELECT analyzer, boot, last_seq FROM analyzer_boots
        WHERE typeof(last_seq) != 'integer' OR last_seq < -1 OR last_seq > ${Number.MAX_SAFE_INTEGER}`)
      .all() as Row[];
    if (!bad.length) return [];
    const valid = `typeof(s) = 'integer' AND s >= 0 AND s <= ${Number.MAX_SAFE_INTEGER}`;
    const highest = this.db.prepare(`SELECT MAX(s) AS m FROM (
        SELECT seq AS s FROM spectra WHERE analyzer = @a AND boot = @b
        UNION ALL SELECT start_seq FROM batches WHERE analyzer = @a AND boot = @b
        UNION ALL SELECT end_seq FROM batches WHERE analyzer = @a AND boot = @b AND end_seq IS NOT NULL
        UNION ALL SELECT seq FROM analyzer_status WHERE analyzer = @a AND boot = @b
        UNION ALL SELECT seq FROM rejected_entries WHERE analyzer = @a AND boot = @b
      ) WHERE ${valid}`);
    const invalidRejected = this.db.prepare(`SELECT COUNT(*) AS n FROM (SELECT seq AS s FROM rejected_entries WHERE analyzer = @a AND boot = @b) WHERE NOT (${valid})`);
    const set = this.db.prepare('UPDATE analyzer_boots SET last_seq = ? WHERE analyzer = ? AND boot = ?');
    return this.db.transaction(() =>
      bad.map((r): StreamPositionRepair => {
        const args = { a: r.analyzer, b: r.boot };
        const now = ((highest.get(args) as Row).m as number | null) ?? -1;
        set.run(now, r.analyzer, r.boot);
        return { analyzer: r.analyzer, boot: r.boot, was: r.last_seq, now, invalidRejectedRows: (invalidRejected.get(args) as Row).n as number };
      }),
    )();
  }

  async commitIngest(w: IngestWrite) {
    if (this.writer) await this.writer.commit(w);
    else this.commitTx(w);
  }
  async maxOutboxSeqByUnit() {
    const m = new Map<string, number>();
    for (const r of this.st.maxOutbox.all() as Row[]) m.set(r.unit, r.m);
    return m;
  }

  async latestAnalyzerStatuses() {
    return (this.st.latestStatuses.all() as Row[]).map((r) => ({
      analyzer: r.analyzer, boot: r.boot, seq: r.seq, t: r.t, status: r.status, code: r.code, detail: r.detail, unit: r.unit, receivedAt: r.received_at,
    }));
  }
  async lastUnitByAnalyzer() {
    const m = new Map<string, string>();
    for (const r of this.st.lastUnits.all() as Row[]) m.set(r.analyzer, r.unit);
    return m;
  }

  async getBatch(id: string) {
    const r = this.st.getBatch.get(id) as Row | undefined;
    return r ? batchFromRow(r) : null;
  }
  async batchIds() {
    return (this.st.batchIds.all() as Row[]).map((r) => r.id as string);
  }
  async listBatches(f: BatchFilter) {
    const where: string[] = [];
    const args: unknown[] = [];
    if (f.unit) (where.push('unit = ?'), args.push(f.unit));
    if (f.product) (where.push('product = ?'), args.push(f.product));
    if (f.status) (where.push('status = ?'), args.push(f.status));
    if (f.from !== undefined) (where.push('start_t >= ?'), args.push(f.from));
    if (f.to !== undefined) (where.push('start_t <= ?'), args.push(f.to));
    if (f.ids) (where.push(`id IN (${f.ids.map(() => '?').join(',') || "''"})`), args.push(...f.ids));
    const w = where.length ? `WHERE ${where.join(' AND ')}` : '';
    const total = (this.db.prepare(`SELECT COUNT(*) AS n FROM batches ${w}`).get(...args) as Row).n as number;
    const rows = this.db.prepare(`SELECT * FROM batches ${w} ORDER BY start_t DESC, id LIMIT ? OFFSET ?`).all(...args, f.limit, f.offset) as Row[];
    return { items: rows.map(batchFromRow), total };
  }
  async openBatches() {
    return (this.st.openBatches.all() as Row[]).map(batchFromRow);
  }
  async readSpectra(batch: string, fromSeq: number, toSeq: number, limit: number) {
    return (this.st.readSpectra.all(batch, fromSeq, toSeq, limit) as Row[]).map(spectrumFromRow);
  }
  spectrumSource(): SpectrumSourceRef {
    if (this.db.memory) throw new Error('an in-memory database cannot be read from another thread; use a database file');
    return { kind: 'sqlite', file: this.db.name };
  }
  async spectrumTimes(batch: string) {
    return Float64Array.from((this.st.spectrumTimes.all(batch) as Row[]).map((r) => r.t as number));
  }
  async *iterateSpectra(batch: string, pageSize = 2000): AsyncIterable<SpectrumRow> {
    let idx = 0;
    for (;;) {
      const rows = this.st.pageSpectra.all(batch, idx, pageSize) as Row[];
      for (const r of rows) yield spectrumFromRow(r);
      if (rows.length < pageSize) return;
      idx = (rows[rows.length - 1]!.idx as number) + 1;
    }
  }
  async storedEntry(analyzer: string, boot: number, seq: number): Promise<StoredEntry | 'refused' | null> {
    const sp = this.db.prepare('SELECT t, vals FROM spectra WHERE analyzer = ? AND boot = ? AND seq = ?').get(analyzer, boot, seq) as Row | undefined;
    if (sp) return { type: 'spectrum', t: sp.t, values: blobF32(sp.vals) };
    const bs = this.db.prepare('SELECT id, unit, product, start_t FROM batches WHERE analyzer = ? AND boot = ? AND start_seq = ?').get(analyzer, boot, seq) as Row | undefined;
    if (bs) return { type: 'batch-start', t: bs.start_t, unit: bs.unit, batch: bs.id, product: bs.product };
    const be = this.db.prepare('SELECT id, end_t, end_reason FROM batches WHERE analyzer = ? AND boot = ? AND end_seq = ?').get(analyzer, boot, seq) as Row | undefined;
    if (be) return { type: 'batch-end', t: be.end_t, batch: be.id, reason: be.end_reason ?? null };
    const as = this.db.prepare('SELECT t, status, code, detail FROM analyzer_status WHERE analyzer = ? AND boot = ? AND seq = ?').get(analyzer, boot, seq) as Row | undefined;
    if (as) return { type: 'analyzer-status', t: as.t, status: as.status, code: as.code ?? null, detail: as.detail ?? null };
    const rj = this.db.prepare('SELECT 1 FROM rejected_entries WHERE analyzer = ? AND boot = ? AND seq = ?').get(analyzer, boot, seq);
    return rj ? 'refused' : null;
  }
  async getSpectrumBySeq(batch: string, seq: number) {
    const r = this.st.spectrumBySeq.get(batch, seq) as Row | undefined;
    return r ? spectrumFromRow(r) : null;
  }
  async readResults(batch: string, fromSeq: number, toSeq: number, limit: number) {
    return (this.st.readResults.all(batch, fromSeq, toSeq, limit) as Row[]).map((r) => JSON.parse(r.body) as MonitorResult);
  }
  async lastResult(batch: string) {
    const r = this.st.lastResult.get(batch) as Row | undefined;
    return r ? (JSON.parse(r.body) as MonitorResult) : null;
  }
  async resultCount(batch: string) {
    return (this.st.resultCount.get(batch) as Row).n as number;
  }
  async scanCounts(batches: string[]) {
    const out = new Map<string, { suspect: number; unjudged: number }>();
    for (const b of new Set(batches)) {
      const r = this.st.scanCounts.get(b) as Row;
      if ((r.n as number) > 0) out.set(b, { suspect: r.suspect as number, unjudged: r.unjudged as number });
    }
    return out;
  }

  async nextModelVersion(name: string) {
    return (this.st.nextVersion.get(name) as Row).v as number;
  }
  async insertModelVersion(m: ModelVersionRow) {
    this.st.insertModel.run(m.id, m.name, m.version, m.product, m.sha256, m.body, JSON.stringify(m.settings), JSON.stringify(m.referenceBatches),
      m.components, m.confidence, m.createdAt, m.createdBy);
  }
  async getModelVersion(id: string) {
    const r = this.st.getModel.get(id) as Row | undefined;
    return r ? modelFromRow(r) : null;
  }
  async listModelVersions() {
    return (this.st.listModels.all() as Row[]).map(modelFromRow);
  }
  async approveModelVersion(id: string, by: string, at: number, reason: string) {
    this.approveModelVersionSync(id, by, at, reason);
  }
  async retireModelVersion(id: string, by: string, at: number, reason: string) {
    this.retireModelVersionSync(id, by, at, reason);
  }
  /**
   * The same, synchronously: for use inside another SQLite transaction (an electronic signature),
   * where a throw must roll the signature back with the state change.
   */
  approveModelVersionSync(id: string, by: string, at: number, reason: string): void {
    const r = this.st.approveModel.run(at, by, reason, id);
    if (r.changes !== 1) throw new Error(`model version ${id} is not a draft`);
  }
  retireModelVersionSync(id: string, by: string, at: number, reason: string): void {
    this.db.transaction(() => {
      const r = this.st.retireModel.run(at, by, reason, id);
      if (r.changes !== 1) throw new Error(`model version ${id} is already retired`);
      this.st.endModelDeployments.run(at, id);
    })();
  }
  async insertEvaluation(e: EvaluationResult) {
    this.st.insertEval.run(e.id, e.versionId, e.createdAt, e.createdBy, JSON.stringify(e));
  }
  async listEvaluations(versionId: string) {
    return (this.st.listEvals.all(versionId) as Row[]).map((r) => JSON.parse(r.body) as EvaluationResult);
  }
  async deploy(d: DeploymentRow) {
    this.deploySync(d);
  }
  /** The same, synchronously: inside another transaction (an electronic signature). */
  deploySync(d: DeploymentRow): void {
    this.db.transaction(() => {
      this.st.endUnitDeployments.run(d.deployedAt, d.unit);
      this.st.insertDeployment.run(d.id, d.unit, d.modelVersion, d.deployedAt, d.deployedBy, d.reason);
    })();
  }
  async activeDeployment(unit: string) {
    const r = this.st.activeDeployment.get(unit) as Row | undefined;
    return r ? deploymentFromRow(r) : null;
  }
  async listDeployments(f: { unit?: string; active?: boolean }) {
    const where: string[] = [];
    const args: unknown[] = [];
    if (f.unit) (where.push('unit = ?'), args.push(f.unit));
    if (f.active !== undefined) where.push(f.active ? 'ended_at IS NULL' : 'ended_at IS NOT NULL');
    const w = where.length ? `WHERE ${where.join(' AND ')}` : '';
    return (this.db.prepare(`SELECT * FROM deployments ${w} ORDER BY deployed_at DESC`).all(...args) as Row[]).map(deploymentFromRow);
  }
  async endDeploymentsOfModel(versionId: string, at: number) {
    this.st.endModelDeployments.run(at, versionId);
  }

  async listAlarms(f: AlarmFilter) {
    const where: string[] = [];
    const args: unknown[] = [];
    if (f.unit) (where.push('unit = ?'), args.push(f.unit));
    if (f.batch) (where.push('batch = ?'), args.push(f.batch));
    if (f.state) (where.push('state = ?'), args.push(f.state));
    if (f.active !== undefined) (where.push('active = ?'), args.push(f.active ? 1 : 0));
    if (f.open) where.push(`(state != 'normal' OR shelved_until IS NOT NULL)`);
    const w = where.length ? `WHERE ${where.join(' AND ')}` : '';
    const total = (this.db.prepare(`SELECT COUNT(*) AS n FROM alarms ${w}`).get(...args) as Row).n as number;
    const rows = this.db.prepare(`SELECT * FROM alarms ${w} ORDER BY updated_at DESC, id LIMIT ? OFFSET ?`).all(...args, f.limit, f.offset) as Row[];
    return { items: rows.map(alarmFromRow), total };
  }
  async getAlarm(id: string) {
    const r = this.st.getAlarm.get(id) as Row | undefined;
    return r ? alarmFromRow(r) : null;
  }
  async liveAlarms() {
    return (this.st.liveAlarms.all() as Row[]).map(alarmFromRow);
  }
  async listEndpointEvents(batch: string) {
    return (this.st.endpointEvents.all(batch) as Row[]).map(
      (r): EndpointEventRow => ({ id: r.id, unit: r.unit, batch: r.batch, from: r.from_state, to: r.to_state, t: r.t, seq: r.seq, reason: r.reason, recordedAt: r.recorded_at }),
    );
  }
  async addLabValues(rows: LabValueRow[], within?: (rows: LabValueRow[], uow: UnitOfWork) => Promise<void>) {
    if (rows.length === 0) return;
    // In a unit of work (BEGIN IMMEDIATE): a second process (the CLI beside the server) waits for
    // the write lock instead of checking against values that are about to change.
    await this.unitOfWork(async (uow) => {
      this.addLabTx(rows);
      if (within) await within(rows, uow);
    });
  }
  async listLabValues(batch: string) {
    return (this.st.labValues.all(batch) as Row[]).map(labValueFromRow);
  }
  async activeShadowRuns() {
    return (this.db.prepare('SELECT id, unit, model_version FROM shadow_runs WHERE ended_at IS NULL ORDER BY unit').all() as Row[]).map((r) => ({ id: r.id as string, unit: r.unit as string, modelVersion: r.model_version as string }));
  }
  async shadowRunOfBatch(batch: string) {
    const r = this.db.prepare('SELECT r.id, r.model_version FROM shadow_batches b JOIN shadow_runs r ON r.id = b.run WHERE b.batch = ? LIMIT 1').get(batch) as Row | undefined;
    return r ? { id: r.id as string, modelVersion: r.model_version as string } : null;
  }
}

function alarmParams(a: Alarm) {
  return { ...a, active: a.active ? 1 : 0, suppressedBy: (a.suppressedBy ?? []).join(','), raisedSpectrumT: a.raisedSpectrumT ?? null, spectrumT: a.spectrumT ?? null };
}
function bootFromRow(r: Row): AnalyzerBootRow {
  return { analyzer: r.analyzer, boot: r.boot, axis: blobF64(r.axis), instrument: r.instrument, firstSeen: r.first_seen, lastSeen: r.last_seen, lastSeq: r.last_seq };
}
function spectrumFromRow(r: Row): SpectrumRow {
  return { batch: r.batch, idx: r.idx, seq: r.seq, t: r.t, values: blobF32(r.vals) };
}
