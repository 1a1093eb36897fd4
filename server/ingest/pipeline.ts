/**
 * The ingest pipeline: validates each log entry of an analyzer against the stream and batch state,
 * feeds spectra to the unit's batch monitor, and writes spectrum, result, alarm changes and outbox
 * rows in one group commit (durable, synchronous=FULL) before the ack goes out.
 *
 * State kept in memory (streams, open batches, monitors, live alarms, outbox counters) is rebuilt
 * from storage at start: open batches' monitors by replaying their stored spectra.
 */
import { randomUUID } from 'node:crypto';
import { EventEmitter } from 'node:events';
import { performance } from 'node:perf_hooks';
import { stateOnAcknowledge, stateOnCondition, stateOnReturn } from '../../core/alarms/life-cycle.ts';
import { activationsInWindow } from '../../core/alarms/chattering.ts';
import { suppressionFor } from '../../core/alarms/alarm-book.ts';
import { DEFAULT_ALARM_SETTINGS, type SuppressionReason } from '../../core/alarms/types.ts';
import type { Alarm, AnalyzerStatusView, ModelRef } from '../../core/api/rest.ts';
import type { LivePoint, LiveUnitStatus } from '../../core/api/live.ts';
import type { AlarmKind, AlarmPriority, AlarmState, ConditionKind, EndpointState, EndpointStatus, MonitorResult } from '../../core/monitor/types.ts';
import { IngestProtocolError, isValidSeq, type AnalyzerStatusMessage, type BatchEndMessage, type BatchStartMessage, type IngestErrorCode, type LogEntry, type SpectrumEntry } from '../../core/protocol/ingest-messages.ts';
import { axisProblem, fmtTime, isoTimeOrNull, timeProblem } from '../../core/protocol/plausibility.ts';
import type { AuditEntry } from '../audit/types.ts';
import type { ServerConfig } from '../config.ts';
import type { Logger } from '../logger.ts';
import type { Metrics } from '../metrics.ts';
import { coreMonitoring, type BatchMonitorLike, type CoreMonitoring, type MonitoringModelLike } from '../monitor/core-monitor.ts';
import { emptyIngestWrite, type BatchRow, type IngestWrite, type OutboxRow, type Storage, type StoredEntry, type UnitRow } from '../storage/storage.ts';

/** What the pipeline needs from a connection to answer it. */
export interface AckSink {
  sendAck(seq: number): void;
  close(code: number, reason: string): void;
}

export interface StreamState {
  analyzer: string;
  boot: number;
  axis: Float64Array;
  /** Highest seq accepted (stored or pending commit); -1 when none. */
  lastAccepted: number;
  /** Highest seq durably committed; -1 when none. */
  lastCommitted: number;
  conn: AckSink | null;
}

export interface OpenBatch {
  id: string;
  unit: string;
  analyzer: string;
  boot: number;
  product: string;
  startT: number;
  startSeq: number;
  axisLength: number;
  modelVersion: string | null;
  nextIdx: number;
  lastSeq: number;
  lastT: number;
  monitor: BatchMonitorLike | null;
  latest: MonitorResult | null;
  endpoint: EndpointStatus | null;
  endpointState: EndpointState | null;
  endpointAt: number | null;
  /** Spectra judged suspect (single points beyond a limit) and spectra too damaged to judge, so far. */
  suspectCount: number;
  unjudgedCount: number;
  /** Server clock (ms) of the last entry received for this batch. */
  lastDataAt: number;
  stale: boolean;
  /** A candidate version judging this batch in shadow (docs/model-life.md): results stored apart, never signalled or annunciated. */
  shadow?: { run: string; versionId: string; monitor: BatchMonitorLike } | null;
}

interface DeployedModel {
  ref: ModelRef;
  model: MonitoringModelLike | null;
}

/** Codes whose entry consumes its seq when refused (the analyzer goes on with the next one). */
const CONSUMING: ReadonlySet<IngestErrorCode> = new Set([
  'bad-message', 'bad-frame', 'wrong-length', 'non-finite', 'time-implausible', 'time-backwards', 'no-open-batch',
  'batch-already-open', 'batch-id-taken', 'batch-mismatch', 'unknown-unit', 'model-mismatch',
]);

export type AcceptOutcome = 'accepted' | 'duplicate-committed' | 'duplicate-pending';

/**
 * A batch-start accepted and not yet durable. Its connection takes nothing more until the commit
 * holding it is done (IngestConnection waits on `done`), so nothing else of the batch is in that commit.
 */
interface PendingStart {
  ob: OpenBatch;
  st: StreamState;
  seq: number;
  /** The outbox row of the start (removed, and the unit's later rows renumbered, if the start is refused at commit). */
  row: OutboxRow;
  /** The unit the analyzer served before this start. */
  prevUnit: string | undefined;
  /** What clears a standing model-mismatch alarm of the unit once the start is durable. */
  judgedBy: string;
  done: Promise<void>;
  resolve: () => void;
  reject: (e: unknown) => void;
}

interface PostCommit {
  events: [string, unknown][];
  /** Batch-starts in this commit. */
  starts: PendingStart[];
  audits: AuditEntry[];
  acks: Map<StreamState, number>;
  latencies: number[];
  spectra: number;
  /** Callers waiting for this commit (an operator's alarm change): settled when it is durable or failed. */
  waiters: { resolve: () => void; reject: (e: unknown) => void }[];
}

export class IngestPipeline {
  readonly streams = new Map<string, StreamState>();
  readonly openByAnalyzer = new Map<string, OpenBatch>();
  readonly openByUnit = new Map<string, OpenBatch>();
  readonly units = new Map<string, UnitRow>();
  private readonly deployments = new Map<string, DeployedModel>();
  /** Active shadow run per unit: batches started while it runs are judged by its version too. */
  private readonly shadowRuns = new Map<string, { id: string; versionId: string }>();
  private readonly models = new Map<string, MonitoringModelLike>();
  private batchIds = new Set<string>();
  private readonly alarmsById = new Map<string, Alarm>();
  private readonly alarmIdByKey = new Map<string, string>();
  private outboxSeq = new Map<string, number>();
  /** Recent activation times per alarm id, for the chattering count (a restart starts the count afresh). */
  private activations = new Map<string, number[]>();
  private readonly core: CoreMonitoring = coreMonitoring;
  /** Latest NAMUR NE 107 status report per analyzer (message analyzer-status), rebuilt from storage at start. */
  private readonly analyzerStatus = new Map<string, AnalyzerStatusView>();
  /** The unit each analyzer served last (its last batch, or the unit its last status named). */
  private readonly lastUnitOf = new Map<string, string>();
  /** Server clock (ms) at which each analyzer now in function check entered it (start of the unbroken run of function-check reports). */
  private readonly functionCheckSince = new Map<string, number>();
  /**
   * Analyzers whose function check outlasted ingest.functionCheckMaxMs while a batch of theirs ran:
   * suppression by function-check has lapsed for their unit until they report another status.
   */
  private readonly functionCheckOverdue = new Set<string>();
  /** Where alarm actions taken by the server itself (suppression by state) are recorded; set by the app once the audit trail is installed. */
  audit: { record(e: AuditEntry): unknown } | null = null;

  private uow: IngestWrite = emptyIngestWrite();
  private post: PostCommit = newPost();
  /** The batch-start of a stream that is not yet durable (see whenStarted). */
  private readonly startOf = new Map<StreamState, PendingStart>();
  private touched = new Set<OpenBatch>();
  private pendingEntries = 0;
  private timer: NodeJS.Timeout | null = null;
  private flushing: Promise<void> = Promise.resolve();
  private queuedFlush: Promise<void> | null = null;
  private ticker: NodeJS.Timeout | null = null;
  private closed = false;

  constructor(
    private readonly storage: Storage,
    private readonly config: ServerConfig,
    readonly events: EventEmitter,
    private readonly metrics: Metrics,
    private readonly log: Logger,
    private readonly now: () => number = Date.now,
  ) {}

  /** The core monitoring functions, for the parts of the server that build or replay models. */
  async getCore(): Promise<CoreMonitoring> {
    return this.core;
  }

  async start(): Promise<void> {
    await this.load();
    const fcMax = this.functionCheckMaxMs();
    const every = Math.max(50, Math.min(1000, Math.floor(this.config.ingest.staleAfterMs / 4), fcMax === null ? Infinity : Math.floor(fcMax / 4)));
    this.ticker = setInterval(() => void this.tick().catch((e) => this.log.error('tick failed', e)), every);
    this.ticker.unref();
  }

  async stop(): Promise<void> {
    this.closed = true;
    if (this.ticker) clearInterval(this.ticker);
    await this.flush();
  }

  /** (Re)build the in-memory state from storage. */
  private async load(): Promise<void> {
    for (const r of await this.storage.repairStreamPositions()) {
      this.log.warn(
        `analyzer ${r.analyzer} boot ${r.boot}: the stored stream position ${String(r.was)} is not a valid seq (an earlier version adopted a refused entry's seq); ` +
          `repaired to ${r.now}, the highest seq stored for it, so the analyzer resends from ${r.now + 1}` +
          (r.invalidRejectedRows ? ` (${r.invalidRejectedRows} refused-entry record(s) with an invalid seq are kept as they are)` : ''),
      );
    }
    this.units.clear();
    for (const u of await this.storage.listUnits()) this.units.set(u.id, u);
    this.batchIds = new Set(await this.storage.batchIds());
    this.outboxSeq = await this.storage.maxOutboxSeqByUnit();
    this.lastUnitOf.clear();
    for (const [a, u] of await this.storage.lastUnitByAnalyzer()) this.lastUnitOf.set(a, u);
    this.analyzerStatus.clear();
    this.functionCheckSince.clear();
    this.functionCheckOverdue.clear();
    for (const r of await this.storage.latestAnalyzerStatuses()) {
      this.analyzerStatus.set(r.analyzer, { analyzer: r.analyzer, status: r.status, code: r.code, detail: r.detail, t: r.t, receivedAt: r.receivedAt });
      // Only the latest report is at hand here: a function check counts from it (if the analyzer
      // repeated its function-check report, from the repeat: the limit may run longer once).
      if (r.status === 'function-check') this.functionCheckSince.set(r.analyzer, r.receivedAt);
      if (r.unit && !this.lastUnitOf.has(r.analyzer)) this.lastUnitOf.set(r.analyzer, r.unit);
    }
    this.alarmsById.clear();
    this.alarmIdByKey.clear();
    for (const a of await this.storage.liveAlarms()) this.indexAlarm(a);
    this.deployments.clear();
    for (const u of this.units.keys()) await this.refreshDeployment(u);
    this.shadowRuns.clear();
    for (const r of await this.storage.activeShadowRuns()) {
      this.shadowRuns.set(r.unit, { id: r.id, versionId: r.modelVersion });
      await this.loadModel(r.modelVersion).catch((e) => this.log.error(`model ${r.modelVersion} of shadow run ${r.id} cannot be read`, e));
    }
    this.openByAnalyzer.clear();
    this.openByUnit.clear();
    for (const row of await this.storage.openBatches()) {
      const ob = await this.rebuildOpenBatch(row);
      this.openByAnalyzer.set(ob.analyzer, ob);
      this.openByUnit.set(ob.unit, ob);
    }
    this.updateAlarmGauge();
  }

  private async rebuildOpenBatch(row: BatchRow): Promise<OpenBatch> {
    const ob: OpenBatch = {
      id: row.id, unit: row.unit, analyzer: row.analyzer, boot: row.boot, product: row.product, startT: row.startT,
      startSeq: row.startSeq, axisLength: row.axis.length, modelVersion: row.modelVersion, nextIdx: row.spectrumCount,
      lastSeq: row.lastSeq ?? row.startSeq, lastT: row.lastT ?? row.startT, monitor: null, latest: null, endpoint: null,
      endpointState: row.endpointState, endpointAt: row.endpointAt, suspectCount: 0, unjudgedCount: 0, lastDataAt: this.now(), stale: false,
    };
    const counted = (await this.storage.scanCounts([row.id])).get(row.id);
    if (counted) {
      ob.suspectCount = counted.suspect;
      ob.unjudgedCount = counted.unjudged;
    }
    const staleId = this.alarmIdByKey.get(alarmKey(row.unit, row.id, 'stale'));
    if (staleId && this.alarmsById.get(staleId)?.active) ob.stale = true;
    const overdueId = this.alarmIdByKey.get(alarmKey(row.unit, row.id, FUNCTION_CHECK_OVERDUE));
    if (overdueId && this.alarmsById.get(overdueId)?.active && this.analyzerStatus.get(row.analyzer)?.status === 'function-check') {
      this.functionCheckOverdue.add(row.analyzer);
    }
    if (!row.modelVersion && isoTimeOrNull(ob.lastT) === null) {
      // stored by an older version: a last time no date holds would make every later entry time-backwards
      let prevT = row.startT;
      for await (const s of this.storage.iterateSpectra(row.id)) if (isoTimeOrNull(s.t) !== null && s.t > prevT) prevT = s.t;
      this.log.warn(`batch ${row.id}: its stored last time ${ob.lastT} is not a valid time; the batch goes on after ${fmtTime(prevT)}`);
      ob.lastT = prevT;
    }
    const sr = await this.storage.shadowRunOfBatch(row.id);
    if (sr && this.shadowRuns.get(row.unit)?.id === sr.id) {
      try {
        const sm = await this.loadModel(sr.modelVersion);
        if (sm) {
          const monitor = this.core.createBatchMonitor(sm, row.startT);
          let prevT = -Infinity;
          for await (const s of this.storage.iterateSpectra(row.id)) {
            if (isoTimeOrNull(s.t) === null || !(s.t > prevT)) continue; // as the deployed monitor's replay below
            prevT = s.t;
            monitor.push(s.seq, s.t, s.values);
          }
          ob.shadow = { run: sr.id, versionId: sr.modelVersion, monitor };
        }
      } catch (e) {
        this.log.error(`rebuilding the shadow monitor of batch ${row.id} failed; the shadow run skips the rest of it`, e);
      }
    }
    if (row.modelVersion) {
      const model = await this.loadModel(row.modelVersion);
      if (model) {
        try {
          ob.monitor = this.core.createBatchMonitor(model, row.startT);
          let last: MonitorResult | null = null;
          let prevT = -Infinity;
          const skipped: string[] = [];
          for await (const s of this.storage.iterateSpectra(row.id)) {
            // An older version may have stored a spectrum with a time no date holds or not after the
            // one before: it is left out, as it was never judged, instead of failing the rebuild.
            // (Bad pixels, non-finite ones included, are the monitor's to flag: docs/bad-pixels.md.)
            const why = isoTimeOrNull(s.t) === null ? `time ${s.t} ms is not a valid time` : !(s.t > prevT) ? 'time not after the spectrum before it' : null;
            if (why) {
              skipped.push(`seq ${s.seq}: ${why}`);
              continue;
            }
            prevT = s.t;
            const r = ob.monitor.push(s.seq, s.t, s.values);
            if (r.quality?.judged !== false) last = r;
          }
          // the batch goes on after its last spectrum that could be judged (never after t = 1e300)
          if (skipped.length) ob.lastT = Math.max(prevT, row.startT);
          if (skipped.length) this.log.warn(`batch ${row.id}: ${skipped.length} stored spectra cannot be judged and are left out of the rebuilt monitor (${skipped.slice(0, 3).join('; ')}${skipped.length > 3 ? '; …' : ''})`);
          ob.latest = last;
          ob.endpoint = last?.endpoint ?? null;
          if (ob.endpoint && ob.endpointState === 'signalled') {
            ob.monitor.markSignalled(ob.endpointAt ?? ob.lastT);
            ob.endpoint = { ...ob.endpoint, state: 'signalled' };
          }
        } catch (e) {
          this.log.error(`rebuilding the monitor of batch ${row.id} failed`, e);
          ob.monitor = null;
        }
      }
    }
    return ob;
  }

  async loadModel(versionId: string): Promise<MonitoringModelLike | null> {
    const cached = this.models.get(versionId);
    if (cached) return cached;
    const row = await this.storage.getModelVersion(versionId);
    if (!row) return null;
    const m = this.core.parseMonitoringModel(row.body);
    this.models.set(versionId, m);
    return m;
  }

  /** Re-read the unit's deployment (after a deploy or retire). Batches already open keep their model. */
  async refreshDeployment(unit: string): Promise<void> {
    const d = await this.storage.activeDeployment(unit);
    if (!d) {
      this.deployments.delete(unit);
      return;
    }
    const row = await this.storage.getModelVersion(d.modelVersion);
    if (!row) return;
    let model: MonitoringModelLike | null = null;
    try {
      model = await this.loadModel(d.modelVersion);
    } catch (e) {
      this.log.error(`model ${d.modelVersion} deployed to ${unit} cannot be read`, e);
    }
    this.deployments.set(unit, { ref: { versionId: row.id, name: row.name, version: row.version, sha256: row.sha256 }, model });
    this.events.emit('unit-changed', unit);
  }

  addUnit(u: UnitRow): void {
    this.units.set(u.id, u);
    this.events.emit('unit-changed', u.id);
  }

  /** The axis the unit's analyzer sends now: its open batch's analyzer, else the connected analyzer that last served it; null when none is connected. */
  unitAnalyzerAxis(unit: string): { analyzer: string; axis: Float64Array } | null {
    const ob = this.openByUnit.get(unit);
    const analyzer = ob?.analyzer ?? [...this.lastUnitOf].filter(([, u]) => u === unit).map(([a]) => a).find((a) => this.streams.has(a)) ?? null;
    const st = analyzer ? this.streams.get(analyzer) : undefined;
    return st ? { analyzer: st.analyzer, axis: st.axis } : null;
  }

  private unitsReadAt = 0;

  /**
   * Learn units created beside the running server (`tideline unit add` writes to the same database):
   * returns the ids that were new. Called from the ticker every few seconds and by the REST routes
   * when they meet a unit id they do not know, so such a unit is usable without a restart.
   */
  async refreshUnits(): Promise<string[]> {
    this.unitsReadAt = this.now();
    const added: string[] = [];
    for (const u of await this.storage.listUnits()) {
      if (this.units.has(u.id)) continue;
      this.addUnit(u);
      added.push(u.id);
    }
    if (added.length) this.log.info(`unit(s) created outside this server picked up: ${added.join(', ')}`);
    // Batches imported beside the running server (tideline import): their ids are taken, so a
    // batch-start naming one is refused as used instead of failing the group commit it joins.
    for (const id of await this.storage.batchIds()) this.batchIds.add(id);
    return added;
  }

  /** Batch ids stored by another path (an import): a batch-start naming one is refused as used. */
  noteBatchIds(ids: Iterable<string>): void {
    for (const id of ids) this.batchIds.add(id);
  }

  deploymentRef(unit: string): ModelRef | null {
    return this.deployments.get(unit)?.ref ?? null;
  }

  // ---- streams -----------------------------------------------------------------------------

  /**
   * Handle a hello: returns the stream state (resumeAfter = lastCommitted). Throws
   * IngestProtocolError('axis-mismatch') when the (analyzer, boot) announced a different axis before.
   */
  async openStream(analyzer: string, boot: number, axis: number[], instrument: string | null, conn: AckSink): Promise<StreamState> {
    const { axisMinNm, axisMaxNm } = this.config.ingest;
    const bad = axisProblem(axis, { minNm: axisMinNm, maxNm: axisMaxNm });
    if (bad) throw new IngestProtocolError('bad-axis', `hello.${bad.message}`);
    const now = this.now();
    if (!(await this.storage.getAnalyzer(analyzer))) await this.storage.createAnalyzer({ id: analyzer, name: analyzer, createdAt: now });
    const prev = await this.storage.getAnalyzerBoot(analyzer, boot);
    if (prev && !sameAxis(prev.axis, axis)) {
      throw new IngestProtocolError(
        'axis-mismatch',
        `analyzer ${analyzer} boot ${boot} announced a ${prev.axis.length}-point axis (${prev.axis[0]}…${prev.axis[prev.axis.length - 1]} nm) before; this hello has ${axis.length} points (${axis[0]}…${axis[axis.length - 1]} nm). A new axis needs a new boot epoch.`,
      );
    }
    const existing = this.streams.get(analyzer);
    if (existing?.conn && existing.conn !== conn) existing.conn.close(4000, 'replaced by a newer connection of the same analyzer');
    const ob = this.openByAnalyzer.get(analyzer);
    if (ob && ob.boot !== boot) {
      // The analyzer restarted: its open batch cannot continue under a new seq numbering.
      this.endBatch(ob, { seq: null, t: ob.lastT, reason: `analyzer restarted (boot ${ob.boot} → ${boot}) before batch-end` });
    }
    await this.flush();
    await this.storage.upsertAnalyzerBoot({ analyzer, boot, axis: Float64Array.from(axis), instrument, firstSeen: now, lastSeen: now });
    const stored = prev?.lastSeq ?? -1;
    const mem = existing && existing.boot === boot ? existing.lastCommitted : -1;
    const last = Math.max(stored, mem);
    const st: StreamState = { analyzer, boot, axis: Float64Array.from(axis), lastAccepted: last, lastCommitted: last, conn };
    this.streams.set(analyzer, st);
    this.events.emit('unit-changed', ob?.unit ?? null);
    return st;
  }

  closeStream(st: StreamState, conn: AckSink): void {
    if (st.conn === conn) {
      st.conn = null;
      const ob = this.openByAnalyzer.get(st.analyzer);
      if (ob) this.events.emit('unit-changed', ob.unit);
    }
  }

  isConnected(analyzer: string): boolean {
    return !!this.streams.get(analyzer)?.conn;
  }

  // ---- entries -----------------------------------------------------------------------------

  /** Validate and take one log entry. Throws IngestProtocolError naming the problem. */
  accept(st: StreamState, e: LogEntry, receivedAt: number): AcceptOutcome {
    // The codecs only pass valid seqs; checked here as well, since a position is never anything else.
    if (!isValidSeq(e.seq)) throw new IngestProtocolError('bad-message', `seq ${e.seq} is not an integer 0 … 2^53 − 1`);
    if (e.seq <= st.lastAccepted) {
      this.metrics.duplicates.inc();
      return e.seq <= st.lastCommitted ? 'duplicate-committed' : 'duplicate-pending';
    }
    if (st.lastAccepted >= 0 && e.seq !== st.lastAccepted + 1) {
      throw new IngestProtocolError('seq-gap', `expected seq ${st.lastAccepted + 1}, got ${e.seq}; resend from ${st.lastAccepted + 1}`, e.seq);
    }
    this.checkTime(e);
    switch (e.type) {
      case 'spectrum':
        this.acceptSpectrum(st, e, receivedAt);
        break;
      case 'batch-start':
        this.acceptBatchStart(st, e);
        break;
      case 'batch-end':
        this.acceptBatchEnd(st, e);
        break;
      case 'analyzer-status':
        this.acceptAnalyzerStatus(st, e);
        break;
    }
    this.advance(st, e.seq);
    this.metrics.entries.inc({ type: e.type });
    return 'accepted';
  }

  /**
   * A resend of an entry at or below the stream position (a duplicate): compared with what is stored
   * under the same (analyzer, boot, seq) once pending commits are done. Resolves null when it is the
   * same entry (ack it again), or a `conflict` error naming the difference: an entry with other
   * content under a seq already taken is never acked as if it were stored. A refused entry's content
   * is not kept, so its resend is acked as before.
   */
  async checkResend(st: StreamState, e: LogEntry): Promise<IngestProtocolError | null> {
    await this.flush();
    const stored = await this.storage.storedEntry(st.analyzer, st.boot, e.seq);
    if (stored === null || stored === 'refused') return null;
    const diff = entryDifference(stored, e);
    if (!diff) return null;
    return new IngestProtocolError(
      'conflict',
      `${e.type} seq ${e.seq} (boot ${st.boot}) differs from the ${stored.type} stored under that seq: ${diff}. A seq names one entry; the stored one stands. Resend it unchanged, or send new entries with new seqs (a new boot epoch starts the numbering afresh)`,
      e.seq,
    );
  }

  /**
   * The plausibility window of `t` against the server clock (ingest.maxAheadMs, ingest.maxBehindMs).
   * An entry outside it is refused as time-implausible (its seq is consumed): one entry stamped in
   * the future would otherwise make every correctly stamped entry after it time-backwards.
   */
  private checkTime(e: LogEntry) {
    const p = timeProblem(e.t, this.now(), this.config.ingest);
    if (p) throw new IngestProtocolError(p.kind === 'non-finite' ? 'non-finite' : 'time-implausible', `${e.type} seq ${e.seq}: ${p.message}`, e.seq);
  }

  /**
   * An entry refused with an error: when the error consumes its seq (see docs/protocol.md), record
   * the refusal and move the stream on. Returns true when consumed.
   */
  refuse(st: StreamState | null, err: IngestProtocolError): boolean {
    // Only a valid seq is consumed: an invalid one (1.5, 1e300, > 2^53 − 1) never moves the position.
    if (!st || !isValidSeq(err.seq) || !CONSUMING.has(err.code)) return false;
    if (err.seq <= st.lastAccepted) return false;
    if (st.lastAccepted >= 0 && err.seq !== st.lastAccepted + 1) return false;
    this.uow.rejected.push({ analyzer: st.analyzer, boot: st.boot, seq: err.seq, code: err.code, message: err.message, receivedAt: this.now() });
    const ob = this.openByAnalyzer.get(st.analyzer);
    if (ob) ob.lastDataAt = this.now();
    this.advance(st, err.seq);
    return true;
  }

  private advance(st: StreamState, seq: number) {
    if (!isValidSeq(seq)) throw new Error(`internal: stream position ${seq} is not a valid seq`);
    st.lastAccepted = seq;
    this.post.acks.set(st, seq);
    this.pendingEntries++;
    this.schedule();
  }

  private acceptSpectrum(st: StreamState, e: SpectrumEntry, receivedAt: number) {
    const ob = this.openByAnalyzer.get(st.analyzer);
    if (!ob) throw new IngestProtocolError('no-open-batch', `spectrum seq ${e.seq}: analyzer ${st.analyzer} has no open batch; send batch-start first`, e.seq);
    if (e.values.length !== ob.axisLength) {
      throw new IngestProtocolError('wrong-length', `spectrum seq ${e.seq} has ${e.values.length} values; the axis of batch ${ob.id} has ${ob.axisLength} points`, e.seq);
    }
    if (e.t < ob.startT || (ob.nextIdx > 0 && e.t <= ob.lastT)) {
      throw new IngestProtocolError(
        'time-backwards',
        `spectrum seq ${e.seq}: time ${fmtTime(e.t)} is not after the previous entry of batch ${ob.id} (${fmtTime(ob.lastT)})`,
        e.seq,
      );
    }
    const now = this.now();
    const idx = ob.nextIdx++;
    ob.lastSeq = e.seq;
    ob.lastT = e.t;
    ob.lastDataAt = now;
    this.uow.spectra.push({ batch: ob.id, idx, seq: e.seq, t: e.t, values: e.values, analyzer: st.analyzer, boot: st.boot, receivedAt: now });
    this.post.latencies.push(receivedAt);
    this.post.spectra++;
    this.touched.add(ob);
    if (ob.stale) this.clearStale(ob, e.seq, e.t);
    if (ob.shadow) this.judgeInShadow(ob, idx, e);
    if (!ob.monitor) return;
    let r: MonitorResult;
    try {
      r = ob.monitor.push(e.seq, e.t, e.values);
    } catch (err) {
      this.log.error(`monitor of batch ${ob.id} failed on seq ${e.seq}; the spectrum is stored without a result`, err);
      return;
    }
    this.uow.results.push({ batch: ob.id, idx, modelVersion: ob.modelVersion!, result: r });
    // A spectrum too damaged to judge (docs/bad-pixels.md) is stored with its result row; the views keep the last judged one.
    const judged = r.quality?.judged !== false;
    if (!judged) ob.unjudgedCount++;
    else if (r.suspect) ob.suspectCount++;
    if (judged) {
      ob.latest = r;
      ob.endpoint = r.endpoint;
    }
    for (const c of r.conditionChanges) {
      this.applyCondition(ob.unit, ob.id, { kind: c.kind, key: c.key, active: c.active, message: c.message, value: c.value, limit: c.limit, priority: c.priority, spectrumT: e.t }, e.seq, now);
    }
    for (const ev of r.events) {
      if (ev.type === 'endpoint-state') {
        ob.endpointState = ev.to;
        if (ev.to === 'done' && ob.endpointAt === null) ob.endpointAt = ev.t;
        const rec = { id: randomUUID(), unit: ob.unit, batch: ob.id, from: ev.from, to: ev.to, t: ev.t, seq: ev.seq, reason: ev.reason, recordedAt: now };
        this.uow.endpointEvents.push(rec);
        this.addOutbox(ob.unit, 'endpoint-state', { unit: ob.unit, batch: ob.id, ...ev });
        this.post.events.push(['endpoint', { unit: ob.unit, batch: ob.id, from: ev.from, to: ev.to, endpoint: r.endpoint, t: ev.t, seq: ev.seq }]);
      } else {
        // the condition's suppression by state now (ISA-18.2), as on the alarm rows: a receiver of raw
        // conditions can tell a suppressed one without waiting for the 'alarm' row
        this.addOutbox(ob.unit, 'condition', { unit: ob.unit, batch: ob.id, ...ev, suppressedBy: this.suppressionOf(ob.unit, ob.id, ev.change.kind) });
      }
    }
    if (ob.endpointState === null) ob.endpointState = r.endpoint.state;
    if (judged) this.post.events.push(['result', { unit: ob.unit, batch: ob.id, result: r }]);
  }

  /**
   * The shadow run's candidate judges the spectrum too: its result is stored apart (shadow_results);
   * its conditions and endpoint never reach the alarm life cycle, the outbox or /live.
   */
  private judgeInShadow(ob: OpenBatch, idx: number, e: SpectrumEntry) {
    const sh = ob.shadow!;
    try {
      const r = sh.monitor.push(e.seq, e.t, e.values);
      (this.uow.shadowResults ??= []).push({ run: sh.run, batch: ob.id, idx, result: r });
    } catch (err) {
      this.log.error(`shadow monitor (${sh.versionId}) of batch ${ob.id} failed on seq ${e.seq}; the shadow run skips the rest of the batch`, err);
      ob.shadow = null;
    }
  }

  /** A shadow run started or stopped on a unit: batches started from now on follow it; a stopped run stops judging at once. */
  setShadowRun(unit: string, run: { id: string; versionId: string } | null): void {
    if (run) this.shadowRuns.set(unit, run);
    else {
      this.shadowRuns.delete(unit);
      const ob = this.openByUnit.get(unit);
      if (ob) ob.shadow = null;
    }
  }

  /**
   * The health of the version deployed on a unit (docs/model-life.md): a low-priority unit-level
   * alarm through the usual life cycle while a health test fails. Written only when it changes.
   */
  async setModelHealth(unit: string, active: boolean, message: string, value: number | null, limit: number | null): Promise<void> {
    const id = this.alarmIdByKey.get(alarmKey(unit, null, MODEL_HEALTH));
    const cur = id ? this.alarmsById.get(id) : undefined;
    if (!cur?.active && !active) return;
    // The text after ' — ' carries figures that change with every batch: rewritten only when what precedes it (the failing tests) changes.
    const head = (m: string) => m.split(' — ')[0];
    if (cur && cur.active === active && head(cur.message) === head(message)) return;
    this.applyCondition(unit, null, { kind: 'model-health', key: MODEL_HEALTH, active, priority: 4, message, value, limit }, null, this.now());
    this.post.events.push(['unit-changed', unit]);
    await this.flush();
  }

  /**
   * A signal channel went on past missing outbox rows `from`…`to` of a unit after waiting `waitedMs`
   * (server/signals/dispatcher.ts): an event for the control system may never have reached it. An
   * alarm on the unit (kind `signal`, key `signal-gap:<channel>`, priority 1, never suppressed) goes
   * through the usual life cycle: raised and, the channel having gone on, returned at once — it
   * stands cleared-unacknowledged until an operator acknowledges it. Resolves once it is durable.
   */
  async signalGap(channel: string, unit: string, from: number, to: number, waitedMs: number): Promise<void> {
    if (!this.units.has(unit)) await this.refreshUnits();
    const n = to - from + 1;
    const what = n === 1 ? `outbox event #${from}` : `${n} outbox events #${from}–${to}`;
    const message =
      `signal channel ${channel} found no ${what} of unit ${unit} after waiting ${(waitedMs / 1000).toFixed(1)} s and went on past the gap: ` +
      'a signal to the control system (an alarm change, an endpoint state or a batch event) may have been lost; compare with what the receiver got, and look for a failed commit in the server log';
    const now = this.now();
    const c = { kind: 'signal' as const, key: `${SIGNAL_GAP}:${channel}`, priority: 1 as const, value: n, limit: 0, message };
    this.applyCondition(unit, null, { ...c, active: true }, null, now);
    this.applyCondition(unit, null, { ...c, active: false }, null, now);
    this.post.events.push(['unit-changed', unit]);
    await this.flush();
  }

  /** Active shadow run of a unit. */
  shadowRun(unit: string): { id: string; versionId: string } | null {
    return this.shadowRuns.get(unit) ?? null;
  }

  private acceptBatchStart(st: StreamState, e: BatchStartMessage) {
    const cur = this.openByAnalyzer.get(st.analyzer);
    if (cur) {
      throw new IngestProtocolError('batch-already-open', `batch-start seq ${e.seq}: analyzer ${st.analyzer} still has batch ${cur.id} open; send batch-end for it first`, e.seq);
    }
    if (!this.units.has(e.unit)) {
      throw new IngestProtocolError('unknown-unit', `batch-start seq ${e.seq}: unit "${e.unit}" is not known to this server; an administrator must create it first`, e.seq);
    }
    const busy = this.openByUnit.get(e.unit);
    if (busy) {
      throw new IngestProtocolError('batch-already-open', `batch-start seq ${e.seq}: unit ${e.unit} already runs batch ${busy.id} (analyzer ${busy.analyzer})`, e.seq);
    }
    if (this.batchIds.has(e.batch)) throw batchIdTaken(e.seq, e.batch);
    const now = this.now();
    const dep = this.deployments.get(e.unit) ?? null;
    let monitor: BatchMonitorLike | null = null;
    if (dep) {
      // A model is deployed: the batch is judged by it or not started at all (never acked and
      // silently unjudged). No deployment at all is the normal case of collecting reference batches.
      const refuse = (why: string): never => {
        const message = `batch-start seq ${e.seq}: batch ${e.batch} cannot be judged on unit ${e.unit}: ${why}; the batch is not started. Deploy a model for this analyzer's axis, or retire the deployment to collect unjudged batches`;
        this.applyCondition(e.unit, null, { kind: 'analyzer', key: MODEL_MISMATCH, active: true, priority: 1, value: st.axis.length, limit: dep.model?.chain.inputAxis.length ?? null, message }, e.seq, now);
        this.post.events.push(['unit-changed', e.unit]);
        throw new IngestProtocolError('model-mismatch', message, e.seq);
      };
      if (!dep.model) refuse(`the model deployed to it (${dep.ref.name} v${dep.ref.version}) cannot be read`);
      const inAxis = dep.model!.chain.inputAxis;
      if (!sameAxis(inAxis, st.axis)) {
        refuse(
          `model does not fit the analyzer: ${dep.ref.name} v${dep.ref.version} deployed to ${e.unit} expects ${axisWords(inAxis)}, analyzer ${st.analyzer} sends ${axisWords(st.axis)}`,
        );
      }
      try {
        monitor = this.core.createBatchMonitor(dep.model!, e.t);
      } catch (err) {
        this.log.error(`creating the monitor for batch ${e.batch} failed`, err);
        refuse(`its monitor cannot be created from model ${dep.ref.name} v${dep.ref.version} (${(err as Error)?.message ?? String(err)})`);
      }
    }
    const ob: OpenBatch = {
      id: e.batch, unit: e.unit, analyzer: st.analyzer, boot: st.boot, product: e.product, startT: e.t, startSeq: e.seq,
      axisLength: st.axis.length, modelVersion: monitor ? dep!.ref.versionId : null, nextIdx: 0, lastSeq: e.seq, lastT: e.t,
      monitor, latest: null, endpoint: null, endpointState: monitor ? 'running' : null, endpointAt: null, suspectCount: 0, unjudgedCount: 0, lastDataAt: now, stale: false,
      shadow: null,
    };
    const sr = this.shadowRuns.get(e.unit);
    const sm = sr ? this.models.get(sr.versionId) : undefined;
    if (sr && sm && sameAxis(sm.chain.inputAxis, st.axis)) {
      try {
        ob.shadow = { run: sr.id, versionId: sr.versionId, monitor: this.core.createBatchMonitor(sm, e.t) };
        (this.uow.shadowBatches ??= []).push({ run: sr.id, batch: ob.id });
      } catch (err) {
        this.log.error(`creating the shadow monitor (${sr.versionId}) for batch ${e.batch} failed; the batch is not judged in shadow`, err);
      }
    }
    this.uow.batchStarts.push({
      id: ob.id, unit: ob.unit, analyzer: ob.analyzer, boot: ob.boot, product: ob.product, startSeq: e.seq, startT: e.t,
      axis: st.axis, modelVersion: ob.modelVersion, createdAt: now,
    });
    this.batchIds.add(ob.id);
    const prevUnit = this.lastUnitOf.get(ob.analyzer);
    this.lastUnitOf.set(ob.analyzer, ob.unit);
    this.openByAnalyzer.set(ob.analyzer, ob);
    this.openByUnit.set(ob.unit, ob);
    this.touched.add(ob);
    const row = this.outboxRow(ob.unit, 'batch-start', { unit: ob.unit, batch: ob.id, product: ob.product, t: e.t, model: dep?.ref ?? null });
    this.uow.outbox.push(row);
    this.post.events.push(['batch', { event: 'started', batch: ob.id, unit: ob.unit }]);
    let resolve!: () => void;
    let reject!: (e: unknown) => void;
    const done = new Promise<void>((res, rej) => {
      resolve = res;
      reject = rej;
    });
    done.catch(() => undefined); // settled for whoever waits; unobserved when no one does
    const ps: PendingStart = {
      ob, st, seq: e.seq, row, prevUnit, done, resolve, reject,
      judgedBy: `batch ${e.batch} started and is judged${dep ? ` by ${dep.ref.name} v${dep.ref.version}` : ''}`,
    };
    this.post.starts.push(ps);
    this.startOf.set(st, ps);
  }

  /**
   * Resolves once the batch-start this stream sent last is durable; rejects with `batch-id-taken`
   * when its commit found the id taken by another path (an import by another process that this
   * server had not yet learnt of). Resolves at once when no start of the stream is pending.
   */
  whenStarted(st: StreamState): Promise<void> {
    return this.startOf.get(st)?.done ?? Promise.resolve();
  }

  private acceptBatchEnd(st: StreamState, e: BatchEndMessage) {
    const ob = this.openByAnalyzer.get(st.analyzer);
    if (!ob) throw new IngestProtocolError('no-open-batch', `batch-end seq ${e.seq}: analyzer ${st.analyzer} has no open batch`, e.seq);
    if (ob.id !== e.batch) throw new IngestProtocolError('batch-mismatch', `batch-end seq ${e.seq} names batch ${e.batch}, but the open batch is ${ob.id}`, e.seq);
    if (e.t < ob.lastT) {
      throw new IngestProtocolError('time-backwards', `batch-end seq ${e.seq}: time ${fmtTime(e.t)} is before the last spectrum of batch ${ob.id}`, e.seq);
    }
    this.endBatch(ob, { seq: e.seq, t: e.t, reason: e.reason ?? null });
  }

  private endBatch(ob: OpenBatch, end: { seq: number | null; t: number; reason: string | null }) {
    this.touched.add(ob);
    this.uow.batchEnds.push({ batch: ob.id, endSeq: end.seq, endT: end.t, endReason: end.reason });
    if (ob.stale) this.clearStale(ob, end.seq);
    this.clearFunctionCheckOverdue(ob, end.seq, `batch ${ob.id} ended`);
    this.openByAnalyzer.delete(ob.analyzer);
    if (this.openByUnit.get(ob.unit) === ob) this.openByUnit.delete(ob.unit);
    this.addOutbox(ob.unit, 'batch-end', { unit: ob.unit, batch: ob.id, t: end.t, reason: end.reason, endpointState: ob.endpointState, endpointAt: ob.endpointAt });
    this.post.events.push(['batch', { event: 'ended', batch: ob.id, unit: ob.unit }]);
    this.returnBatchAlarms(ob, end.seq, end.t);
    this.applySuppression(ob.unit, end.seq, `batch ${ob.id} ended${end.reason ? ` (${end.reason})` : ''}`);
    this.schedule();
  }

  private acceptAnalyzerStatus(st: StreamState, e: AnalyzerStatusMessage) {
    if (e.unit !== undefined && !this.units.has(e.unit)) {
      throw new IngestProtocolError('unknown-unit', `analyzer-status seq ${e.seq}: unit "${e.unit}" is not known to this server; an administrator must create it first`, e.seq);
    }
    const ob = this.openByAnalyzer.get(st.analyzer) ?? null;
    if (e.unit !== undefined && ob && ob.unit !== e.unit) {
      throw new IngestProtocolError('batch-mismatch', `analyzer-status seq ${e.seq} names unit ${e.unit}, but the open batch ${ob.id} of analyzer ${st.analyzer} runs on unit ${ob.unit}`, e.seq);
    }
    const now = this.now();
    const unit = e.unit ?? ob?.unit ?? this.lastUnitOf.get(st.analyzer) ?? null;
    const other = unit !== null && !ob ? this.openByUnit.get(unit) : undefined;
    if (other && other.analyzer !== st.analyzer) {
      // Only the analyzer of a running batch speaks for its unit: another one can neither raise nor
      // clear the unit's alarms (its analyzer-failure alarm stands for the analyzer that raised it).
      throw new IngestProtocolError(
        'batch-mismatch',
        `analyzer-status seq ${e.seq}: unit ${unit} runs batch ${other.id} of analyzer ${other.analyzer}; analyzer ${st.analyzer} has no batch there and cannot report status for it`,
        e.seq,
      );
    }
    const prev = this.analyzerStatus.get(st.analyzer) ?? null;
    const view: AnalyzerStatusView = { analyzer: st.analyzer, status: e.status, code: e.code ?? null, detail: e.detail ?? null, t: e.t, receivedAt: now };
    this.analyzerStatus.set(st.analyzer, view);
    if (view.status !== 'function-check') {
      this.functionCheckSince.delete(st.analyzer);
      this.functionCheckOverdue.delete(st.analyzer);
    } else if (prev?.status !== 'function-check' || !this.functionCheckSince.has(st.analyzer)) this.functionCheckSince.set(st.analyzer, now);
    this.uow.analyzerStatus.push({ analyzer: st.analyzer, boot: st.boot, seq: e.seq, t: e.t, status: e.status, code: view.code, detail: view.detail, unit, receivedAt: now });
    if (!unit) return;
    this.lastUnitOf.set(st.analyzer, unit);
    const changed = !prev || prev.status !== view.status || prev.code !== view.code || prev.detail !== view.detail;
    if (changed) {
      const payload = { unit, analyzer: st.analyzer, batch: ob?.id ?? null, status: view.status, previous: prev?.status ?? null, code: view.code, detail: view.detail, t: e.t, seq: e.seq };
      this.addOutbox(unit, 'analyzer-status', payload);
      this.post.events.push(['analyzer-status', payload]);
    }
    if (view.status !== 'function-check' && ob) this.clearFunctionCheckOverdue(ob, e.seq, `analyzer ${st.analyzer} reports ${view.status}`);
    const failed = view.status === 'failure';
    // One failure alarm per analyzer on the unit (key analyzer-failure:<analyzer>): a report of one
    // analyzer never raises or clears the alarm of another.
    const key = `${ANALYZER_FAILURE}:${st.analyzer}`;
    const standing = this.alarmIdByKey.get(alarmKey(unit, null, key));
    // Raised or cleared when the alarm on this unit does not say what the analyzer reports (a failing
    // analyzer that moves to another unit raises it there too).
    const standingActive = !!standing && !!this.alarmsById.get(standing)?.active;
    if (failed !== standingActive) {
      const what = [view.code, view.detail].filter(Boolean).join(': ');
      this.applyCondition(unit, null, {
        kind: 'analyzer', key, active: failed, priority: 2, value: failed ? 1 : 0, limit: 0,
        message: failed ? `analyzer ${st.analyzer} reports failure (NE 107 F)${what ? `: ${what}` : ''}` : `analyzer ${st.analyzer} reports ${view.status} (no longer failure)`,
      }, e.seq, now);
    }
    if (!failed) {
      // an alarm an earlier version raised under the shared key, if it was this analyzer's
      const legacy = this.alarmIdByKey.get(alarmKey(unit, null, ANALYZER_FAILURE));
      const la = legacy ? this.alarmsById.get(legacy) : undefined;
      if (la?.active && la.message.startsWith(`analyzer ${st.analyzer} `)) {
        this.applyCondition(unit, null, { kind: 'analyzer', key: ANALYZER_FAILURE, active: false, priority: 2, value: 0, limit: 0, message: `analyzer ${st.analyzer} reports ${view.status} (no longer failure)` }, e.seq, now);
      }
    }
    this.applySuppression(unit, e.seq, `analyzer ${st.analyzer} reports ${view.status}${view.code ? ` (${view.code})` : ''}`);
    this.post.events.push(['unit-changed', unit]);
  }

  /** The NE 107 status of the analyzer that serves the unit (open batch's analyzer, else the last one). */
  unitAnalyzerStatus(unit: string): AnalyzerStatusView | null {
    const ob = this.openByUnit.get(unit);
    if (ob) return this.analyzerStatus.get(ob.analyzer) ?? null;
    let best: AnalyzerStatusView | null = null;
    for (const [a, u] of this.lastUnitOf) {
      if (u !== unit) continue;
      const v = this.analyzerStatus.get(a);
      if (v && (!best || v.receivedAt > best.receivedAt)) best = v;
    }
    return best;
  }

  /** Suppression by state (ISA-18.2) of an alarm of this kind on this unit and batch now. */
  private suppressionOf(unit: string, batch: string | null, kind: AlarmKind): SuppressionReason[] {
    const ob = this.openByUnit.get(unit);
    const batchRunning = batch === null ? !!ob : ob?.id === batch;
    const st = this.unitAnalyzerStatus(unit);
    // Function check suppresses only up to ingest.functionCheckMaxMs during a batch; beyond, the
    // suppression lapses (functionCheckOverdue) and the alarms are annunciated.
    const functionCheck = st?.status === 'function-check' && !this.functionCheckOverdue.has(st.analyzer);
    return suppressionFor(kind, { batchRunning, functionCheck }, DEFAULT_ALARM_SETTINGS);
  }

  /**
   * The unit's operating context changed (batch ended, analyzer status): suppress or release its
   * alarms. A suppressed alarm reads 'normal' and keeps tracking its condition; on release an
   * alarm whose condition still holds is annunciated afresh (ISA-18.2). Each change is stored with
   * an outbox row and recorded in the audit trail.
   */
  private applySuppression(unit: string, seq: number | null, why: string) {
    const now = this.now();
    for (const cur of [...this.alarmsById.values()]) {
      if (cur.unit !== unit) continue;
      // An ended batch's alarms are past suppression: their conditions ended with the batch
      // (returnBatchAlarms), and an unacknowledged one stays to be acknowledged.
      if (cur.batch !== null && this.batchIds.has(cur.batch) && !this.openBatchById(cur.batch)) continue;
      const before = cur.suppressedBy ?? [];
      const sup = this.suppressionOf(unit, cur.batch, cur.kind);
      if (sup.join(',') === before.join(',')) continue;
      const next: Alarm = { ...cur, suppressedBy: sup, updatedAt: now };
      if (sup.length) next.state = 'normal';
      else if (before.length) {
        next.state = stateOnReturn(cur.active);
        if (next.state === 'active-unacknowledged') {
          next.raisedAt = now;
          next.acknowledgedAt = null;
          next.acknowledgedBy = null;
          next.acknowledgeComment = null;
        }
      }
      this.indexAlarm(next);
      const row = this.outboxRow(unit, 'alarm', { alarm: next, previousState: cur.state });
      this.uow.alarms.push(next);
      this.uow.outbox.push(row);
      this.post.events.push(['alarm', { alarm: next, previousState: cur.state }]);
      const suppressing = sup.length > before.length;
      this.post.audits.push({
        user: 'system', action: suppressing ? 'alarm.suppress' : 'alarm.unsuppress', object: `alarm:${cur.id}`,
        before: { state: cur.state, suppressedBy: before }, after: { state: next.state, suppressedBy: sup },
        reason: `suppression by state (ISA-18.2): ${why}${sup.length ? `; suppressed: ${sup.join(', ')}` : '; no longer suppressed'}`,
      });
    }
    this.updateAlarmGauge();
    this.schedule();
  }

  /**
   * A batch ended: the conditions of its alarms end with it (ISA-18.2 return to normal). An alarm
   * nobody acknowledged returns unacknowledged (cleared-unacknowledged) and stays listed, with its
   * batch, until someone acknowledges it; it is never suppressed or cleared by the system. An
   * acknowledged one returns to normal. Each change goes to the outbox and the audit trail.
   */
  private returnBatchAlarms(ob: OpenBatch, seq: number | null, t: number) {
    const now = this.now();
    for (const cur of [...this.alarmsById.values()]) {
      if (cur.batch !== ob.id) continue;
      const suppressed = (cur.suppressedBy ?? []).length > 0;
      const unacknowledged = !suppressed && (cur.state === 'active-unacknowledged' || cur.state === 'cleared-unacknowledged');
      if (!cur.active && (unacknowledged || cur.state === 'normal') && !suppressed) continue;
      const next: Alarm = {
        ...cur,
        state: unacknowledged ? 'cleared-unacknowledged' : 'normal',
        active: false,
        suppressedBy: [],
        clearedAt: cur.active ? now : cur.clearedAt,
        spectrumT: cur.active ? t : (cur.spectrumT ?? null),
        seq: cur.active && seq !== null ? seq : cur.seq,
        message: cur.active ? `${cur.message} — batch ${ob.id} ended` : cur.message,
        updatedAt: now,
      };
      this.indexAlarm(next);
      const row = this.outboxRow(ob.unit, 'alarm', { alarm: next, previousState: cur.state });
      this.uow.alarms.push(next);
      this.uow.outbox.push(row);
      this.post.events.push(['alarm', { alarm: next, previousState: cur.state }]);
      this.post.audits.push({
        user: 'system', action: 'alarm.return', object: `alarm:${cur.id}`,
        before: { state: cur.state, active: cur.active }, after: { state: next.state, active: false },
        reason: `batch ${ob.id} ended: the condition ended with it${unacknowledged ? '; returned unacknowledged (ISA-18.2), it stays to be acknowledged' : ''}`,
      });
    }
    this.updateAlarmGauge();
  }

  /** The signal channel has delivered the endpoint: done → signalled. Returns false when not applicable. */
  async markSignalled(batch: string, t: number): Promise<boolean> {
    const ob = [...this.openByUnit.values()].find((b) => b.id === batch);
    if (!ob?.monitor) return false;
    const ev = ob.monitor.markSignalled(t);
    if (!ev || ev.type !== 'endpoint-state') return false;
    const now = this.now();
    ob.endpointState = ev.to;
    if (ob.endpoint) ob.endpoint = { ...ob.endpoint, state: ev.to };
    this.touched.add(ob);
    this.uow.endpointEvents.push({ id: randomUUID(), unit: ob.unit, batch: ob.id, from: ev.from, to: ev.to, t: ev.t, seq: ev.seq, reason: ev.reason, recordedAt: now });
    // Receivers learn of 'signalled' like any other state change: through the outbox, in per-unit order.
    this.addOutbox(ob.unit, 'endpoint-state', { unit: ob.unit, batch: ob.id, ...ev });
    this.post.events.push(['endpoint', { unit: ob.unit, batch: ob.id, from: ev.from, to: ev.to, endpoint: ob.endpoint, t: ev.t, seq: ev.seq }]);
    this.pendingEntries++;
    await this.flush();
    return true;
  }

  // ---- alarms ------------------------------------------------------------------------------

  private applyCondition(
    unit: string,
    batch: string | null,
    c: { kind: AlarmKind; key: string; active: boolean; message: string; value: number | null; limit: number | null; priority: AlarmPriority; spectrumT?: number | null },
    seq: number | null,
    now: number,
  ): Alarm | null {
    const k = alarmKey(unit, batch, c.key);
    const id = this.alarmIdByKey.get(k);
    const cur = id ? this.alarmsById.get(id) : undefined;
    if (!cur && !c.active) return null;
    const prevState: AlarmState | null = cur ? cur.state : null;
    const sup = this.suppressionOf(unit, batch, c.kind);
    const wasSuppressed = (cur?.suppressedBy ?? []).length > 0;
    const base: Alarm = cur ?? {
      id: randomUUID(), unit, batch, kind: c.kind, key: c.key, state: 'normal', priority: c.priority, message: c.message,
      value: c.value, limit: c.limit, active: false, raisedAt: now, clearedAt: null, acknowledgedAt: null, acknowledgedBy: null,
      acknowledgeComment: null, shelvedUntil: null, shelvedBy: null, shelveReason: null, seq, updatedAt: now, suppressedBy: [],
      raisedSpectrumT: null, spectrumT: null,
    };
    const next: Alarm = {
      ...base,
      // Suppressed by state: not annunciated (reads 'normal'), the condition is still tracked.
      state: sup.length ? 'normal' : wasSuppressed ? stateOnReturn(c.active) : stateOnCondition(base.state, c.active),
      suppressedBy: sup,
      active: c.active,
      message: c.message,
      value: c.value,
      limit: c.limit,
      priority: c.priority,
      seq: seq ?? base.seq,
      clearedAt: c.active ? null : now,
      raisedAt: cur && cur.state !== 'normal' ? base.raisedAt : c.active ? now : base.raisedAt,
      // the analyzer's time of the spectrum, paired with raisedAt and with seq as they change
      raisedSpectrumT: cur && cur.state !== 'normal' ? (base.raisedSpectrumT ?? null) : c.active ? (c.spectrumT ?? null) : (base.raisedSpectrumT ?? null),
      spectrumT: seq !== null ? (c.spectrumT ?? null) : (base.spectrumT ?? null),
      updatedAt: now,
    };
    if (c.active && cur && cur.state === 'cleared-unacknowledged') next.acknowledgedAt = null;
    // Chattering (ANSI/ISA-18.2): count activations of this alarm within the window.
    const acts = activationsInWindow(this.activations.get(next.id) ?? [], now, DEFAULT_ALARM_SETTINGS.chatterWindowMs);
    if (c.active && !(cur?.active ?? false) && !sup.length) acts.push(now);
    this.activations.set(next.id, acts);
    Object.assign(next, this.alarmActivity(next.id, now));
    this.indexAlarm(next);
    const row = this.outboxRow(unit, 'alarm', { alarm: next, previousState: prevState });
    this.uow.alarms.push(next);
    this.uow.outbox.push(row);
    this.post.events.push(['alarm', { alarm: next, previousState: prevState }]);
    this.updateAlarmGauge();
    return next;
  }

  /** Chattering (ANSI/ISA-18.2-2016: ≥ 3 activations within 60 s) of an alarm at time `now`. */
  alarmActivity(id: string, now: number = this.now()): { recentActivations: number; chattering: boolean } {
    const { chatterWindowMs, chatterActivations } = DEFAULT_ALARM_SETTINGS;
    const n = activationsInWindow(this.activations.get(id) ?? [], now, chatterWindowMs).length;
    return { recentActivations: n, chattering: n >= chatterActivations };
  }

  /** Alarms as stored, with their current chattering count added. */
  withActivity(alarms: Alarm[]): Alarm[] {
    const now = this.now();
    return alarms.map((a) => ({ ...a, ...this.alarmActivity(a.id, now) }));
  }

  private indexAlarm(a: Alarm) {
    const k = alarmKey(a.unit, a.batch, a.key);
    if (a.state === 'normal' && a.shelvedUntil === null && !(a.active && (a.suppressedBy ?? []).length)) {
      this.alarmsById.delete(a.id);
      if (this.alarmIdByKey.get(k) === a.id) this.alarmIdByKey.delete(k);
    } else {
      this.alarmsById.set(a.id, a);
      this.alarmIdByKey.set(k, a.id);
    }
  }

  /** Alarms not in state normal, shelved, or suppressed with their condition present. */
  liveAlarms(): Alarm[] {
    return [...this.alarmsById.values()];
  }

  private clearStale(ob: OpenBatch, seq: number | null, spectrumT: number | null = null) {
    ob.stale = false;
    this.applyCondition(ob.unit, ob.id, { kind: 'stale', key: 'stale', active: false, priority: 2, value: 0, limit: this.config.ingest.staleAfterMs / 1000, message: `data from analyzer ${ob.analyzer} arrives again`, spectrumT }, seq, this.now());
    this.events.emit('unit-changed', ob.unit);
  }

  /** The unit's model-mismatch alarm (a batch-start refused because the deployment cannot judge it) is over. */
  private clearModelMismatch(unit: string, seq: number | null, why: string) {
    const id = this.alarmIdByKey.get(alarmKey(unit, null, MODEL_MISMATCH));
    const cur = id ? this.alarmsById.get(id) : undefined;
    if (!cur?.active) return;
    this.applyCondition(unit, null, { kind: 'analyzer', key: MODEL_MISMATCH, active: false, priority: 1, value: null, limit: null, message: `model mismatch over: ${why}` }, seq, this.now());
  }

  /** ingest.functionCheckMaxMs, null when function check has no time limit (0 or null). */
  private functionCheckMaxMs(): number | null {
    const v = this.config.ingest.functionCheckMaxMs;
    return v === null || v === undefined || v <= 0 ? null : v;
  }

  /**
   * Periodic: the analyzer of this open batch has been in function check longer than
   * ingest.functionCheckMaxMs. The suppression by function-check of the unit's alarms lapses (the
   * standing conditions are annunciated, audited as alarm.unsuppress) and Tideline raises its own
   * analyzer alarm, function-check-overdue, until the analyzer reports another status or the batch
   * ends. Returns true when it raised the alarm (the caller commits).
   */
  private checkFunctionCheckOverdue(ob: OpenBatch, now: number): boolean {
    const max = this.functionCheckMaxMs();
    if (max === null || this.functionCheckOverdue.has(ob.analyzer)) return false;
    if (this.analyzerStatus.get(ob.analyzer)?.status !== 'function-check') return false;
    const since = this.functionCheckSince.get(ob.analyzer);
    if (since === undefined || now - since <= max) return false;
    this.functionCheckOverdue.add(ob.analyzer);
    const forMin = (now - since) / 60_000;
    const maxMin = max / 60_000;
    const what = `analyzer ${ob.analyzer} has been in function check (NE 107 C) for ${fmtMin(forMin)} min during batch ${ob.id}, beyond the limit of ${fmtMin(maxMin)} min (ingest.functionCheckMaxMs)`;
    this.applyCondition(ob.unit, ob.id, {
      kind: 'analyzer', key: FUNCTION_CHECK_OVERDUE, active: true, priority: 1, value: forMin, limit: maxMin,
      message: `${what}; its alarms are no longer suppressed`,
    }, null, now);
    this.applySuppression(ob.unit, null, what);
    this.post.events.push(['unit-changed', ob.unit]);
    return true;
  }

  /** The function check of this batch's analyzer is no longer overdue (another status, batch end). */
  private clearFunctionCheckOverdue(ob: OpenBatch, seq: number | null, why: string) {
    this.functionCheckOverdue.delete(ob.analyzer);
    const id = this.alarmIdByKey.get(alarmKey(ob.unit, ob.id, FUNCTION_CHECK_OVERDUE));
    if (!id || !this.alarmsById.get(id)?.active) return;
    this.applyCondition(ob.unit, ob.id, {
      kind: 'analyzer', key: FUNCTION_CHECK_OVERDUE, active: false, priority: 1, value: 0, limit: (this.functionCheckMaxMs() ?? 0) / 60_000,
      message: `function check of analyzer ${ob.analyzer} over: ${why}`,
    }, seq, this.now());
  }

  /** Operator acknowledges an alarm (ISA-18.2). Throws AlarmRequestError naming why not. */
  async acknowledgeAlarm(id: string, user: string, comment: string | null): Promise<Alarm> {
    const cur = this.alarmsById.get(id) ?? (await this.storage.getAlarm(id));
    if (!cur) throw new AlarmRequestError(404, `alarm ${id} does not exist`);
    const to = stateOnAcknowledge(cur.state);
    if (!to) throw new AlarmRequestError(409, `alarm ${id} is ${cur.state}: there is nothing to acknowledge`);
    const now = this.now();
    const next: Alarm = { ...cur, state: to, acknowledgedAt: now, acknowledgedBy: user, acknowledgeComment: comment, updatedAt: now };
    await this.saveAlarmChange(cur, next);
    return next;
  }

  async shelveAlarm(id: string, user: string, minutes: number, reason: string): Promise<Alarm> {
    const cur = this.alarmsById.get(id) ?? (await this.storage.getAlarm(id));
    if (!cur) throw new AlarmRequestError(404, `alarm ${id} does not exist`);
    if (cur.state === 'normal' && cur.shelvedUntil === null) throw new AlarmRequestError(409, `alarm ${id} is normal: only a standing alarm can be shelved`);
    const now = this.now();
    const next: Alarm = { ...cur, shelvedUntil: now + minutes * 60_000, shelvedBy: user, shelveReason: reason, updatedAt: now };
    await this.saveAlarmChange(cur, next);
    return next;
  }

  async unshelveAlarm(id: string, user: string, why = 'unshelved by operator'): Promise<Alarm> {
    const cur = this.alarmsById.get(id) ?? (await this.storage.getAlarm(id));
    if (!cur) throw new AlarmRequestError(404, `alarm ${id} does not exist`);
    if (cur.shelvedUntil === null) throw new AlarmRequestError(409, `alarm ${id} is not shelved`);
    const now = this.now();
    const state = cur.state === 'normal' ? 'normal' : stateOnReturn(cur.active);
    const next: Alarm = { ...cur, state, shelvedUntil: null, shelvedBy: null, shelveReason: `${why} (${user})`, updatedAt: now };
    await this.saveAlarmChange(cur, next);
    return next;
  }

  /**
   * An operator's change (acknowledge, shelve, unshelve, shelve expiry) commits with the group commit,
   * never beside it: outbox rows of a unit are numbered from one counter, so committing one row
   * ahead of the rows numbered before it would let a dispatcher move its cursor past rows that are
   * not yet committed, and those would never be delivered. Resolves once the change is durable.
   */
  private async saveAlarmChange(cur: Alarm, next: Alarm) {
    const row = this.outboxRow(next.unit, 'alarm', { alarm: next, previousState: cur.state });
    this.indexAlarm(next);
    this.updateAlarmGauge();
    this.uow.alarms.push(next);
    this.uow.outbox.push(row);
    this.post.events.push(['alarm', { alarm: next, previousState: cur.state }]);
    this.post.events.push(['unit-changed', next.unit]);
    const durable = new Promise<void>((resolve, reject) => this.post.waiters.push({ resolve, reject }));
    void this.flush().catch(() => undefined);
    await durable;
  }

  private updateAlarmGauge() {
    const counts: Record<string, number> = { 'active-unacknowledged': 0, 'active-acknowledged': 0, 'cleared-unacknowledged': 0 };
    for (const a of this.alarmsById.values()) if (a.state !== 'normal') counts[a.state] = (counts[a.state] ?? 0) + 1;
    for (const [state, n] of Object.entries(counts)) this.metrics.activeAlarms.set({ state }, n);
  }

  /** Periodic: stale data, shelve expiry. */
  private async tick() {
    const now = this.now();
    if (now - this.unitsReadAt >= 2000) await this.refreshUnits();
    let overdue = false;
    for (const ob of [...this.openByUnit.values()]) overdue = this.checkFunctionCheckOverdue(ob, now) || overdue;
    if (overdue) await this.flush();
    for (const ob of this.openByUnit.values()) {
      if (!ob.stale && now - ob.lastDataAt > this.config.ingest.staleAfterMs) {
        ob.stale = true;
        const silentS = (now - ob.lastDataAt) / 1000;
        this.applyCondition(ob.unit, ob.id, {
          kind: 'stale', key: 'stale', active: true, priority: 2, value: silentS, limit: this.config.ingest.staleAfterMs / 1000,
          message: `no data from analyzer ${ob.analyzer} for ${silentS.toFixed(0)} s during batch ${ob.id} (limit ${(this.config.ingest.staleAfterMs / 1000).toFixed(0)} s)`,
        }, null, now);
        this.post.events.push(['unit-changed', ob.unit]);
        this.schedule();
      }
    }
    for (const a of [...this.alarmsById.values()]) {
      if (a.shelvedUntil !== null && a.shelvedUntil <= now) await this.unshelveAlarm(a.id, 'system', 'shelve expired').catch((e) => this.log.error('unshelve failed', e));
    }
  }

  // ---- outbox and commit -------------------------------------------------------------------

  private outboxRow(unit: string, type: string, payload: unknown): OutboxRow {
    const seq = (this.outboxSeq.get(unit) ?? 0) + 1;
    this.outboxSeq.set(unit, seq);
    return { id: randomUUID(), unit, unitSeq: seq, type, payload, createdAt: this.now() };
  }

  private addOutbox(unit: string, type: string, payload: unknown) {
    this.uow.outbox.push(this.outboxRow(unit, type, payload));
  }

  private schedule() {
    if (this.pendingEntries >= this.config.ingest.groupCommitMaxEntries) {
      if (this.timer) clearTimeout(this.timer);
      this.timer = null;
      void this.flush().catch((e) => this.log.error('group commit failed', e));
      return;
    }
    if (this.timer) return;
    this.timer = setTimeout(() => {
      this.timer = null;
      void this.flush().catch((e) => this.log.error('group commit failed', e));
    }, this.config.ingest.groupCommitMs);
  }

  /** Commit everything pending now; resolves after the commit (and the acks) went out. */
  flush(): Promise<void> {
    // While a commit is in flight, entries gather for the next one: one queued commit takes them all
    // (group commits grow with the load instead of queueing many small ones behind each other).
    if (this.queuedFlush) return this.queuedFlush;
    const next = this.flushing.then(() => {
      this.queuedFlush = null;
      return this.commitNow();
    });
    this.queuedFlush = next;
    this.flushing = next.catch(() => undefined);
    return next;
  }

  private async commitNow(): Promise<void> {
    if (this.timer) {
      clearTimeout(this.timer);
      this.timer = null;
    }
    const w = this.uow;
    const post = this.post;
    const touched = this.touched;
    if (this.pendingEntries === 0 && w.spectra.length === 0 && w.batchEnds.length === 0 && w.endpointEvents.length === 0 && w.alarms.length === 0 && w.analyzerStatus.length === 0) return;
    this.uow = emptyIngestWrite();
    this.post = newPost();
    this.touched = new Set();
    const entries = this.pendingEntries;
    this.pendingEntries = 0;
    for (const [st, seq] of post.acks) w.boots.push({ analyzer: st.analyzer, boot: st.boot, lastSeq: seq, lastSeen: this.now() });
    for (const ob of touched) {
      w.batchProgress.push({ batch: ob.id, spectrumCount: ob.nextIdx, lastSeq: ob.lastSeq, lastT: ob.lastT, endpointState: ob.endpointState, endpointAt: ob.endpointAt });
    }
    const t0 = performance.now();
    for (let attempt = 1; ; attempt++) {
      try {
        await this.storage.commitIngest(w);
        break;
      } catch (e) {
        // A batch id taken by another path since the start was accepted (an import by another
        // process, learnt of only every few seconds): that start alone is refused and the rest of
        // the commit, rolled back as a whole, is written again. Any other failure drops the connections.
        const taken = attempt <= 3 ? await this.takenStarts(post).catch(() => []) : [];
        if (taken.length) {
          for (const ps of taken) this.refuseStart(ps, w, post, touched);
          continue;
        }
        this.log.error(`group commit of ${entries} entries failed; dropping their connections and reloading state from storage`, e);
        await this.recover();
        for (const w of post.waiters) w.reject(e);
        for (const ps of post.starts) this.settleStart(ps, e);
        return;
      }
    }
    for (const ps of post.starts) {
      this.settleStart(ps, null);
      if (this.openByUnit.get(ps.ob.unit) === ps.ob) this.clearModelMismatch(ps.ob.unit, ps.seq, ps.judgedBy);
    }
    if (this.uow.alarms.length) this.schedule();
    const t1 = performance.now();
    this.metrics.commitSeconds.observe((t1 - t0) / 1000);
    this.metrics.commitEntries.observe(entries);
    for (const [st, seq] of post.acks) {
      if (seq > st.lastCommitted) st.lastCommitted = seq;
      st.conn?.sendAck(st.lastCommitted);
    }
    const t2 = performance.now();
    for (const rt of post.latencies) this.metrics.ackLatency.observe((t2 - rt) / 1000);
    this.metrics.spectra.inc(post.spectra);
    if (w.outbox.length) this.events.emit('outbox', w.outbox);
    for (const [name, payload] of post.events) this.events.emit(name, payload);
    for (const ob of touched) this.events.emit('unit-changed', ob.unit);
    for (const a of post.audits) this.recordAudit(a);
    for (const w of post.waiters) w.resolve();
  }

  /** Batch-starts of this commit whose id is now stored by another path (not by this stream). */
  private async takenStarts(post: PostCommit): Promise<PendingStart[]> {
    const out: PendingStart[] = [];
    for (const ps of post.starts) {
      const row = await this.storage.getBatch(ps.ob.id);
      if (row && !(row.analyzer === ps.st.analyzer && row.boot === ps.st.boot && row.startSeq === ps.seq)) out.push(ps);
    }
    return out;
  }

  /**
   * Refuse a batch-start at commit time (its id was taken meanwhile): everything of its batch leaves
   * the write `w` and the one gathering behind it, the unit's outbox rows not yet committed are
   * numbered again without the hole, the start is recorded as refused (`batch-id-taken`, its seq
   * consumed as at accept time) and its connection told.
   */
  private refuseStart(ps: PendingStart, w: IngestWrite, post: PostCommit, touched: Set<OpenBatch>) {
    const { ob, st } = ps;
    const id = ob.id;
    const err = batchIdTaken(ps.seq, id, ' (stored by another path, e.g. a command-line import, while this start was being committed)');
    this.log.warn(`analyzer ${st.analyzer} boot ${st.boot}: ${err.message}; only this batch-start is refused, the rest of the group commit is written`);
    const gone = new Set<string>();
    for (const x of [w, this.uow]) {
      x.batchStarts = x.batchStarts.filter((b) => b.id !== id);
      x.batchProgress = x.batchProgress.filter((b) => b.batch !== id);
      x.batchEnds = x.batchEnds.filter((b) => b.batch !== id);
      x.spectra = x.spectra.filter((b) => b.batch !== id);
      x.results = x.results.filter((b) => b.batch !== id);
      x.endpointEvents = x.endpointEvents.filter((b) => b.batch !== id);
      x.alarms = x.alarms.filter((a) => a.batch !== id);
      if (x.shadowBatches) x.shadowBatches = x.shadowBatches.filter((b) => b.batch !== id);
      if (x.shadowResults) x.shadowResults = x.shadowResults.filter((b) => b.batch !== id);
      x.labValues = x.labValues.filter((v) => v.batch !== id);
      for (const o of x.outbox) if (o.id === ps.row.id || (o.unit === ob.unit && (o.payload as { batch?: unknown } | null)?.batch === id)) gone.add(o.id);
    }
    this.renumberOutbox(ob.unit, [w, this.uow], gone);
    w.rejected.push({ analyzer: st.analyzer, boot: st.boot, seq: ps.seq, code: err.code, message: err.message, receivedAt: this.now() });
    for (const a of [...this.alarmsById.values()]) if (a.batch === id) this.alarmsById.delete(a.id);
    for (const [k, aid] of [...this.alarmIdByKey]) if (!this.alarmsById.has(aid) && k.startsWith(`${ob.unit}\u0000${id}\u0000`)) this.alarmIdByKey.delete(k);
    const ofBatch = (p: unknown) => typeof p === 'object' && p !== null && ((p as { batch?: unknown }).batch === id || (p as { alarm?: { batch?: unknown } }).alarm?.batch === id);
    post.events = post.events.filter(([, p]) => !ofBatch(p));
    post.starts = post.starts.filter((x) => x !== ps);
    touched.delete(ob);
    this.touched.delete(ob);
    if (this.openByAnalyzer.get(ob.analyzer) === ob) this.openByAnalyzer.delete(ob.analyzer);
    if (this.openByUnit.get(ob.unit) === ob) this.openByUnit.delete(ob.unit);
    if (this.lastUnitOf.get(ob.analyzer) === ob.unit) {
      if (ps.prevUnit === undefined) this.lastUnitOf.delete(ob.analyzer);
      else this.lastUnitOf.set(ob.analyzer, ps.prevUnit);
    }
    post.events.push(['unit-changed', ob.unit]);
    this.settleStart(ps, err);
  }

  /**
   * The unit's outbox rows not yet committed (in `writes`, oldest first) are numbered again from
   * the first of them, leaving out `gone`: a receiver and the dispatchers see the seq without a hole.
   */
  private renumberOutbox(unit: string, writes: IngestWrite[], gone: Set<string>) {
    let next = Infinity;
    for (const x of writes) for (const o of x.outbox) if (o.unit === unit) next = Math.min(next, o.unitSeq);
    if (next === Infinity) return;
    for (const x of writes) {
      x.outbox = x.outbox.filter((o) => !gone.has(o.id));
      for (const o of x.outbox) if (o.unit === unit) o.unitSeq = next++;
    }
    this.outboxSeq.set(unit, next - 1);
  }

  private settleStart(ps: PendingStart, err: unknown) {
    if (this.startOf.get(ps.st) === ps) this.startOf.delete(ps.st);
    if (err === null) ps.resolve();
    else ps.reject(err);
  }

  private recordAudit(a: AuditEntry) {
    try {
      // The server sets the audit trail before the pipeline starts; there is no second place to record in.
      if (!this.audit) throw new Error('no audit trail is installed');
      this.audit.record(a);
    } catch (e) {
      this.log.error(`audit record ${a.action} ${a.object} failed`, e);
    }
  }

  private async recover() {
    for (const st of this.streams.values()) st.conn?.close(1011, 'server storage error; reconnect and resend');
    this.streams.clear();
    this.models.clear();
    await this.load();
  }

  // ---- views -------------------------------------------------------------------------------

  unitStatus(unitId: string): LiveUnitStatus | null {
    const u = this.units.get(unitId);
    if (!u) return null;
    const ob = this.openByUnit.get(unitId) ?? null;
    const now = this.now();
    let active = 0;
    let unack = 0;
    let prio: AlarmPriority | null = null;
    for (const a of this.alarmsById.values()) {
      if (a.unit !== unitId) continue;
      if (a.state === 'active-unacknowledged' || a.state === 'cleared-unacknowledged') unack++;
      if (a.active && a.state !== 'normal') {
        active++;
        if (prio === null || a.priority < prio) prio = a.priority;
      }
    }
    const connected = ob ? this.isConnected(ob.analyzer) : false;
    const status = !ob ? 'idle' : ob.stale ? 'stale' : !connected ? 'offline' : 'running';
    return {
      id: u.id, name: u.name, kind: u.kind, description: u.description, createdAt: u.createdAt, status,
      analyzer: ob?.analyzer ?? null, analyzerConnected: connected, deployment: this.deploymentRef(unitId),
      openBatch: ob ? { id: ob.id, product: ob.product, startedAt: ob.startT, lastSeq: ob.nextIdx ? ob.lastSeq : null, lastT: ob.nextIdx ? ob.lastT : null, spectrumCount: ob.nextIdx, suspectCount: ob.suspectCount, unjudgedCount: ob.unjudgedCount } : null,
      endpoint: ob?.endpoint ? { ...ob.endpoint, state: ob.endpointState ?? ob.endpoint.state } : null,
      activeAlarms: active, unacknowledgedAlarms: unack, highestPriority: prio,
      silentForMs: ob ? now - ob.lastDataAt : null,
      analyzerStatus: this.unitAnalyzerStatus(unitId),
      suppression: this.suppressionOf(unitId, ob?.id ?? null, 't2'),
      latest: ob?.latest ? livePoint(ob.latest) : null,
    };
  }

  openBatchById(batch: string): OpenBatch | null {
    for (const ob of this.openByUnit.values()) if (ob.id === batch) return ob;
    return null;
  }
}

export class AlarmRequestError extends Error {
  constructor(readonly status: number, message: string) {
    super(message);
  }
}

function newPost(): PostCommit {
  return { events: [], starts: [], audits: [], acks: new Map(), latencies: [], spectra: 0, waiters: [] };
}

/** Key prefix of the unit alarm raised while an analyzer reports NE 107 failure (analyzer-failure:<analyzer>). */
export const ANALYZER_FAILURE = 'analyzer-failure';

/** Key of the unit alarm raised when a batch-start is refused because the deployed model cannot judge the batch. */
export const MODEL_MISMATCH = 'model-mismatch';

/** Key prefix of the unit alarm raised when a signal channel goes past a hole in the unit's outbox seq (signal-gap:<channel>). */
export const SIGNAL_GAP = 'signal-gap';

/** Key of the model-health alarm of a unit (one per unit: the health of the version deployed there). */
export const MODEL_HEALTH = 'model-health';

/** Key of Tideline's own alarm when an analyzer stays in function check beyond ingest.functionCheckMaxMs. */
export const FUNCTION_CHECK_OVERDUE = 'function-check-overdue';

function fmtMin(min: number): string {
  return min >= 10 ? min.toFixed(0) : min.toFixed(1);
}

function batchIdTaken(seq: number, batch: string, how = ''): IngestProtocolError {
  return new IngestProtocolError('batch-id-taken', `batch-start seq ${seq}: batch id "${batch}" is already used${how}; batch ids must be unique, the batch is not started`, seq);
}

function alarmKey(unit: string, batch: string | null, key: string) {
  return `${unit}\u0000${batch ?? ''}\u0000${key}`;
}

/** "601 points, 1000–2200 nm" */
function axisWords(a: ArrayLike<number>): string {
  const f = (v: number) => Number(v.toPrecision(5)).toString();
  return a.length ? `${a.length} points, ${f(a[0]!)}–${f(a[a.length - 1]!)} nm` : 'no points';
}

/** How a resent entry differs from the stored one, or null when it is the same. */
function entryDifference(stored: StoredEntry, e: LogEntry): string | null {
  if (stored.type !== e.type) return `a ${e.type} where a ${stored.type} is stored`;
  if (stored.t !== e.t) return `t is ${fmtTime(e.t)}, stored ${fmtTime(stored.t)}`;
  switch (e.type) {
    case 'spectrum': {
      const v = (stored as Extract<StoredEntry, { type: 'spectrum' }>).values;
      if (v.length !== e.values.length) return `${e.values.length} values, stored ${v.length}`;
      for (let i = 0; i < v.length; i++) if (!Object.is(v[i], e.values[i])) return `values[${i}] is ${e.values[i]}, stored ${v[i]}`;
      return null;
    }
    case 'batch-start': {
      const b = stored as Extract<StoredEntry, { type: 'batch-start' }>;
      for (const k of ['unit', 'batch', 'product'] as const) if (b[k] !== e[k]) return `${k} is "${e[k]}", stored "${b[k]}"`;
      return null;
    }
    case 'batch-end': {
      const b = stored as Extract<StoredEntry, { type: 'batch-end' }>;
      if (b.batch !== e.batch) return `batch is "${e.batch}", stored "${b.batch}"`;
      if (b.reason !== (e.reason ?? null)) return `reason is ${JSON.stringify(e.reason ?? null)}, stored ${JSON.stringify(b.reason)}`;
      return null;
    }
    case 'analyzer-status': {
      const a = stored as Extract<StoredEntry, { type: 'analyzer-status' }>;
      if (a.status !== e.status) return `status is ${e.status}, stored ${a.status}`;
      if (a.code !== (e.code ?? null)) return `code is ${JSON.stringify(e.code ?? null)}, stored ${JSON.stringify(a.code)}`;
      if (a.detail !== (e.detail ?? null)) return `detail differs from the stored one`;
      return null;
    }
  }
}

function sameAxis(a: ArrayLike<number>, b: ArrayLike<number>): boolean {
  if (a.length !== b.length) return false;
  for (let i = 0; i < a.length; i++) if (Math.abs(a[i]! - b[i]!) > 1e-6 * Math.max(1, Math.abs(a[i]!))) return false;
  return true;
}

export function livePoint(r: MonitorResult): LivePoint {
  return {
    seq: r.seq, t: r.t, elapsedMin: r.elapsedMin, progressFraction: r.progressFraction, t2: r.t2, q: r.q,
    t2Limit: r.limits.t2, qLimit: r.limits.q, scores: r.scores.slice(0, 2),
    envelopeOutside: r.envelope.some((e) => e.status === 'above' || e.status === 'below'),
    prediction: r.prediction ? { name: r.prediction.name, unit: r.prediction.unit, value: r.prediction.value } : null,
    suspect: r.suspect,
  };
}

export type { ConditionKind };
