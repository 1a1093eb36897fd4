/**
 * Reduction of /live messages (core/api/live.ts) into what the views draw. The state object is
 * mutated in place (charts read typed-array views of it) and `apply` reports what changed, so a
 * view re-renders only the parts that need it. Deterministic: no clock, no I/O.
 */
import type { Alarm, BatchSummary, ModelRef } from '../../../core/api/rest.ts';
import type { LiveScope, LiveServerMessage, LiveUnitStatus } from '../../../core/api/live.ts';
import type { EndpointStatus, MonitorResult } from '../../../core/monitor/types.ts';
import { SeriesBuffer } from './series-buffer.ts';

/** How many score columns are kept per result (PC1…PC6). */
export const MAX_PCS = 6;
const SCORE_COLS = ['s1', 's2', 's3', 's4', 's5', 's6'] as const;
/** Envelope status per PC as the monitor judged it: 1 above, −1 below, 0 inside, NaN not checked. */
const ENV_COLS = ['e1', 'e2', 'e3', 'e4', 'e5', 'e6'] as const;
export type ScoreCol = (typeof SCORE_COLS)[number];
export type EnvCol = (typeof ENV_COLS)[number];
export const COLUMNS = ['seq', 't', 'elapsedMin', 'progress', 't2', 'q', 'combined', 't2Limit', 'qLimit', 'localT2', 'localQ', 'alarmT2', 'alarmQ', 'outside', 'prediction', ...SCORE_COLS, ...ENV_COLS] as const;
export type Column = (typeof COLUMNS)[number];
export function scoreCol(pc: number): ScoreCol {
  if (pc < 1 || pc > MAX_PCS) throw new Error(`PC${pc} is outside PC1…PC${MAX_PCS}`);
  return SCORE_COLS[pc - 1];
}
export function envCol(pc: number): EnvCol {
  if (pc < 1 || pc > MAX_PCS) throw new Error(`PC${pc} is outside PC1…PC${MAX_PCS}`);
  return ENV_COLS[pc - 1];
}

export interface LiveState {
  subscription: string | null;
  /** Scope of the last snapshot. */
  scope: LiveScope | null;
  /**
   * Unit scope: results arrived for a batch whose summary has not come (a batch started between
   * messages); the view fetches it by REST and sets `batch`.
   */
  pendingBatch: string | null;
  /** Last per-connection counter seen; a jump means messages were lost. */
  lastN: number;
  /** True when a counter jump was seen since the last snapshot (the view should resubscribe). */
  lostMessages: boolean;
  serverTime: number | null;
  units: Map<string, LiveUnitStatus>;
  alarms: Map<string, Alarm>;
  batch: BatchSummary | null;
  model: ModelRef | null;
  series: SeriesBuffer<Column>;
  latest: MonitorResult | null;
  endpoint: EndpointStatus | null;
  /** Results the server could not send (queue full); the view fetches them by REST. */
  gaps: { fromSeq: number; toSeq: number }[];
  truncatedBefore: number | null;
  /** Out-of-order or repeated results ignored. */
  ignored: number;
  error: string | null;
  /** Prediction name and unit, when the model predicts a property. */
  predictionLabel: { name: string; unit: string } | null;
  /** Maximum rows kept for charts. */
  maxRows: number;
}

export interface Changes {
  units: boolean;
  alarms: boolean;
  batch: boolean;
  series: boolean;
  endpoint: boolean;
}

const none = (): Changes => ({ units: false, alarms: false, batch: false, series: false, endpoint: false });

export function createLiveState(maxRows = 50_000): LiveState {
  return {
    subscription: null,
    scope: null,
    pendingBatch: null,
    lastN: 0,
    lostMessages: false,
    serverTime: null,
    units: new Map(),
    alarms: new Map(),
    batch: null,
    model: null,
    series: new SeriesBuffer(COLUMNS, 2048),
    latest: null,
    endpoint: null,
    gaps: [],
    truncatedBefore: null,
    ignored: 0,
    error: null,
    predictionLabel: null,
    maxRows,
  };
}

/** Whether the envelope check of a result has any PC outside its band. */
export function outsideEnvelope(r: MonitorResult): boolean {
  return r.envelope.some((e) => e.status === 'above' || e.status === 'below');
}

/** Append one result; results at or below the last seq are ignored (duplicates, reordering). */
export function appendResult(s: LiveState, r: MonitorResult): boolean {
  const n = s.series.length;
  if (n > 0 && r.seq <= s.series.at('seq', n - 1)) {
    s.ignored++;
    return false;
  }
  // alarm limits drawn only when the model has action limits above the drawn ones
  const al = r.alarmLimits && r.alarmLimits.confidence !== r.limits.confidence ? r.alarmLimits : null;
  const row: Partial<Record<Column, number>> = {
    seq: r.seq,
    t: r.t,
    elapsedMin: r.elapsedMin,
    progress: r.progress,
    t2: r.t2,
    q: r.q,
    combined: r.combined,
    t2Limit: r.limits.t2,
    qLimit: r.limits.q,
    localT2: r.localLimits?.t2,
    localQ: r.localLimits?.q,
    alarmT2: al?.t2,
    alarmQ: al?.q,
    outside: outsideEnvelope(r) || r.t2 > r.limits.t2 || r.q > r.limits.q ? 1 : 0,
    prediction: r.prediction?.value,
  };
  for (let i = 0; i < Math.min(MAX_PCS, r.scores.length); i++) row[SCORE_COLS[i]] = r.scores[i];
  for (const e of r.envelope) if (e.pc >= 1 && e.pc <= MAX_PCS) row[ENV_COLS[e.pc - 1]] = e.status === 'above' ? 1 : e.status === 'below' ? -1 : 0;
  s.series.push(row);
  s.series.keepLast(s.maxRows);
  s.latest = r;
  s.endpoint = r.endpoint;
  if (r.prediction) s.predictionLabel = { name: r.prediction.name, unit: r.prediction.unit };
  return true;
}

/**
 * Insert results fetched by REST after a gap. They may fall before the latest row; the series is
 * rebuilt in seq order (rare, so the copy is acceptable).
 */
export function mergeResults(s: LiveState, results: MonitorResult[]): void {
  if (results.length === 0) return;
  const n = s.series.length;
  const lastSeq = n ? s.series.at('seq', n - 1) : -Infinity;
  if (results.every((r) => r.seq > lastSeq)) {
    const latest = s.latest;
    for (const r of [...results].sort((a, b) => a.seq - b.seq)) appendResult(s, r);
    if (latest && s.latest && latest.seq > s.latest.seq) s.latest = latest;
    return;
  }
  // General case: collect existing rows, merge by seq, rebuild.
  const rows: { seq: number; row: Partial<Record<Column, number>> | null; r: MonitorResult | null }[] = [];
  for (let i = 0; i < n; i++) {
    const row: Partial<Record<Column, number>> = {};
    for (const c of COLUMNS) row[c] = s.series.at(c, i);
    rows.push({ seq: row.seq!, row, r: null });
  }
  const have = new Set(rows.map((x) => x.seq));
  for (const r of results) if (!have.has(r.seq)) rows.push({ seq: r.seq, row: null, r });
  rows.sort((a, b) => a.seq - b.seq);
  const latest = s.latest;
  s.series.clear();
  for (const x of rows) {
    if (x.row) s.series.push(x.row);
    else if (x.r) {
      s.latest = null;
      appendResult(s, x.r);
    }
  }
  s.latest = latest;
  if (latest) s.endpoint = latest.endpoint;
}

/** Forget the previous batch's series and follow a new one. */
function startBatch(s: LiveState, b: BatchSummary | null): void {
  s.batch = b;
  s.pendingBatch = null;
  s.series.clear();
  s.latest = null;
  s.endpoint = null;
  s.gaps = [];
  s.truncatedBefore = null;
  s.predictionLabel = null;
}

/** Set the summary of the batch the view fetched after `pendingBatch` was set. */
export function setBatch(s: LiveState, b: BatchSummary): boolean {
  if (s.pendingBatch !== b.id) return false;
  s.batch = b;
  s.pendingBatch = null;
  return true;
}

/** Apply one server message. Returns what changed. */
export function applyLive(s: LiveState, m: LiveServerMessage): Changes {
  const c = none();
  if ('n' in m && typeof m.n === 'number') {
    if (m.type !== 'snapshot' && s.lastN > 0 && m.n !== s.lastN + 1) s.lostMessages = true;
    s.lastN = m.n;
  }
  if ('serverTime' in m && typeof m.serverTime === 'number') s.serverTime = m.serverTime;
  if ('subscription' in m && s.subscription && m.subscription !== s.subscription) return c; // stale subscription
  switch (m.type) {
    case 'welcome':
    case 'pong':
      return c;
    case 'error':
      s.error = m.message;
      return { ...c, batch: true };
    case 'snapshot': {
      s.lostMessages = false;
      s.scope = m.scope;
      s.pendingBatch = null;
      s.units = new Map(m.units.map((u) => [u.id, u]));
      s.alarms = new Map(m.alarms.map((a) => [a.id, a]));
      s.batch = m.batch;
      s.model = m.model;
      s.truncatedBefore = m.truncatedBefore;
      s.series.clear();
      s.latest = null;
      s.endpoint = m.batch ? (m.units.find((u) => u.id === m.batch!.unit)?.endpoint ?? null) : null;
      s.gaps = [];
      for (const r of m.results) appendResult(s, r);
      return { units: true, alarms: true, batch: true, series: true, endpoint: true };
    }
    case 'result': {
      if (s.batch && m.batch !== s.batch.id) {
        // Unit scope follows the unit's open batch: a result of another batch means a new batch began.
        if (s.scope?.kind !== 'unit' || s.scope.unit !== m.unit) return c;
        startBatch(s, null);
        s.pendingBatch = m.batch;
        c.batch = true;
      } else if (!s.batch && s.scope?.kind === 'unit' && s.pendingBatch !== m.batch) {
        startBatch(s, null);
        s.pendingBatch = m.batch;
        c.batch = true;
      }
      c.series = appendResult(s, m.result);
      c.endpoint = c.series;
      return c;
    }
    case 'alarm':
      s.alarms.set(m.alarm.id, m.alarm);
      c.alarms = true;
      return c;
    case 'endpoint': {
      const u = s.units.get(m.unit);
      if (u && u.openBatch?.id === m.batch) {
        s.units.set(m.unit, { ...u, endpoint: m.endpoint });
        c.units = true;
      }
      if (!s.batch || s.batch.id === m.batch) {
        s.endpoint = m.endpoint;
        if (s.batch) s.batch = { ...s.batch, endpointState: m.to, endpointAt: m.endpoint.doneAt?.t ?? s.batch.endpointAt };
        c.endpoint = true;
        c.batch = true;
      }
      return c;
    }
    case 'unit':
      s.units.set(m.unit.id, m.unit);
      c.units = true;
      return c;
    case 'batch':
      if (s.batch && s.batch.id === m.batch.id) {
        s.batch = m.batch;
        c.batch = true;
      } else if (s.pendingBatch === m.batch.id) {
        s.batch = m.batch;
        s.pendingBatch = null;
        c.batch = true;
      } else if (m.event === 'started' && s.scope?.kind === 'unit' && s.scope.unit === m.batch.unit) {
        startBatch(s, m.batch);
        c.batch = true;
        c.series = true;
        c.endpoint = true;
      }
      return c;
    case 'gap':
      if (!s.batch || s.batch.id === m.batch) s.gaps.push({ fromSeq: m.fromSeq, toSeq: m.toSeq });
      return c;
  }
  return c;
}

/** Alarms to list, most urgent first: unacknowledged active, active, cleared-unacknowledged; then priority, then newest. */
export function sortAlarms(alarms: Iterable<Alarm>): Alarm[] {
  const rank: Record<string, number> = { 'active-unacknowledged': 0, 'active-acknowledged': 1, 'cleared-unacknowledged': 2, normal: 3 };
  return [...alarms].sort((a, b) => (rank[a.state] ?? 9) - (rank[b.state] ?? 9) || a.priority - b.priority || b.raisedAt - a.raisedAt);
}
