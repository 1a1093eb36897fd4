/**
 * What the signal channels publish as a unit's current state (MQTT retained state, OPC UA
 * variables). Built from two sources: delivered outbox events (durable: batch start/end, endpoint
 * state, alarms, analyzer status) and the latest monitor result (live values: progress, T², Q,
 * prediction). Pure reducers: the caller passes the time.
 */
import { ENDPOINT_HOLD_CODES, type AlarmPriority, type AlarmState, type EndpointHold, type EndpointState, type MonitorResult } from '../../core/monitor/types.ts';
import type { SignalEnvelope } from './outbox-store.ts';

/** NAMUR NE 107 status signal categories, plus 'good' when none applies. */
export const NE107_STATUSES = ['good', 'failure', 'function-check', 'out-of-specification', 'maintenance-required'] as const;
export type Ne107Status = (typeof NE107_STATUSES)[number];

/** Quality of the live values, mapped to OPC UA Good / Uncertain / Bad status codes. */
export type ValueQuality = 'good' | 'uncertain' | 'bad';

export interface UnitAlarmSummary {
  /** Tideline alarm id (GET /api/alarms), when the event carried one. */
  id?: string;
  key: string;
  kind: string;
  state: AlarmState;
  priority: AlarmPriority;
  active: boolean;
  shelved: boolean;
  /** The shelve as Tideline recorded it (ISA-18.2: time-limited, with who and why); null when not shelved. */
  shelf: { until: number; by: string | null; reason: string | null } | null;
  /** Suppressed by design (state based, e.g. no batch running, analyzer in function check), when the alarm says so. */
  suppressed: boolean;
  message: string;
  value: number | null;
  limit: number | null;
  t: number;
}

export interface UnitSignalState {
  unit: string;
  batch: string | null;
  batchActive: boolean;
  product: string | null;
  modelVersion: string | null;
  /** 0…1 fraction of the golden batch's course. */
  progress: number | null;
  elapsedMin: number | null;
  endpoint: {
    state: EndpointState | null;
    /** True from the event that reached 'done' (or 'signalled') until the batch ends or the DCS acknowledges (OPC UA). */
    reached: boolean;
    t: number | null;
    reason: string | null;
    etaMin: number | null;
    /** Why the endpoint is held (state 'held': the rule is met and confirmed but a guard stands); empty otherwise. */
    holds: EndpointHold[];
  };
  t2: number | null;
  q: number | null;
  t2Limit: number | null;
  qLimit: number | null;
  prediction: { name: string; unit: string; value: number; extrapolating: boolean } | null;
  analyzer: Ne107Status;
  /** What the analyzer itself last reported (analyzer-status events); `analyzer` adds Tideline's own analyzer alarms. */
  analyzerReported?: Ne107Status;
  stale: boolean;
  quality: ValueQuality;
  /** Why the quality is not good, in words. */
  qualityReason: string | null;
  alarms: UnitAlarmSummary[];
  /** Time of the latest spectrum result (ms epoch). */
  resultT: number | null;
  /** Per-unit outbox sequence of the last event folded in. */
  lastEventSeq: number;
  updatedAt: number;
}

/** T² or Q beyond this multiple of its limit counts as "outside the model" (common practice, no published source). */
export const OUTSIDE_MODEL_FACTOR = 3;

export function emptyUnitState(unit: string, now: number): UnitSignalState {
  return {
    unit,
    batch: null,
    batchActive: false,
    product: null,
    modelVersion: null,
    progress: null,
    elapsedMin: null,
    endpoint: { state: null, reached: false, t: null, reason: null, etaMin: null, holds: [] },
    t2: null,
    q: null,
    t2Limit: null,
    qLimit: null,
    prediction: null,
    analyzer: 'good',
    stale: false,
    quality: 'bad',
    qualityReason: 'no data yet',
    alarms: [],
    resultT: null,
    lastEventSeq: 0,
    updatedAt: now,
  };
}

/**
 * The quality summary of the live values, in the order and categories of their OPC UA status codes
 * (opcua/status-codes.ts liveValueStatus), so MQTT and OPC UA clients read the same judgement:
 * bad — no data, analyzer failure (NE 107 F), function check (NE 107 C: output temporarily invalid);
 * uncertain — stale (the values are the last usable ones), out of specification, outside the model.
 */
function quality(s: UnitSignalState): { quality: ValueQuality; reason: string | null } {
  if (s.resultT === null) return { quality: 'bad', reason: 'no data yet' };
  if (s.analyzer === 'failure') {
    // failure reported by the analyzer, or concluded by one of Tideline's analyzer alarms (e.g. a
    // function check past ingest.functionCheckMaxMs): name which
    const own = s.alarms.find((a) => a.kind === 'analyzer' && a.active);
    return { quality: 'bad', reason: own?.message ? `analyzer failure (NE 107 F): ${own.message}` : 'analyzer failure (NE 107 F)' };
  }
  if (s.analyzer === 'function-check') return { quality: 'bad', reason: 'analyzer in function check (NE 107 C)' };
  if (s.stale) {
    const alarm = s.alarms.find((a) => a.kind === 'stale' && a.active);
    return { quality: 'uncertain', reason: `data stale${alarm?.message ? `: ${alarm.message}` : ''}` };
  }
  if (s.analyzer === 'out-of-specification') return { quality: 'uncertain', reason: 'analyzer out of specification (NE 107 S)' };
  if (s.t2 !== null && s.t2Limit && s.t2 > OUTSIDE_MODEL_FACTOR * s.t2Limit) return { quality: 'uncertain', reason: `T² above ${OUTSIDE_MODEL_FACTOR}× its limit: spectrum outside the model` };
  if (s.q !== null && s.qLimit && s.q > OUTSIDE_MODEL_FACTOR * s.qLimit) return { quality: 'uncertain', reason: `Q above ${OUTSIDE_MODEL_FACTOR}× its limit: spectrum outside the model` };
  if (s.prediction?.extrapolating) return { quality: 'uncertain', reason: 'property prediction extrapolates' };
  return { quality: 'good', reason: null };
}

function withQuality(s: UnitSignalState): UnitSignalState {
  const q = quality(s);
  s.quality = q.quality;
  s.qualityReason = q.reason;
  return s;
}

/** Fold in the latest monitor result. */
export function applyResult(prev: UnitSignalState, r: MonitorResult, meta: { batch?: string | null; modelVersion?: string | null }, now: number): UnitSignalState {
  const s: UnitSignalState = { ...prev, endpoint: { ...prev.endpoint }, updatedAt: now };
  if (meta.batch) {
    if (meta.batch !== s.batch) {
      s.endpoint = { state: null, reached: false, t: null, reason: null, etaMin: null, holds: [] };
    }
    s.batch = meta.batch;
    s.batchActive = true;
  }
  if (meta.modelVersion !== undefined) s.modelVersion = meta.modelVersion;
  s.progress = r.progressFraction;
  s.elapsedMin = r.elapsedMin;
  s.t2 = r.t2;
  s.q = r.q;
  // The limit Tideline's T² / Q alarms are judged against (the action limit when the model has one).
  s.t2Limit = r.alarmLimits?.t2 ?? r.localLimits?.t2 ?? r.limits.t2;
  s.qLimit = r.alarmLimits?.q ?? r.localLimits?.q ?? r.limits.q;
  s.prediction = r.prediction ? { name: r.prediction.name, unit: r.prediction.unit, value: r.prediction.value, extrapolating: r.prediction.extrapolating } : null;
  s.endpoint.state = s.endpoint.state === 'signalled' && r.endpoint.state === 'done' ? 'signalled' : r.endpoint.state;
  s.endpoint.etaMin = r.endpoint.etaMin?.median ?? null;
  s.endpoint.holds = r.endpoint.state === 'held' ? (r.endpoint.holds ?? []).map((h) => ({ ...h })) : [];
  s.resultT = r.t;
  s.stale = false;
  return withQuality(s);
}

type Obj = Record<string, unknown>;
const str = (v: unknown): string | null => (typeof v === 'string' ? v : null);
const num = (v: unknown): number | null => (typeof v === 'number' && Number.isFinite(v) ? v : null);

/** The shelve of an alarm payload: core/api Alarm (shelvedUntil, shelvedBy, shelveReason) or core/alarms (shelved: ShelveInfo). */
function shelfOf(a: Obj): UnitAlarmSummary['shelf'] {
  const until = num(a.shelvedUntil);
  if (until !== null) return { until, by: str(a.shelvedBy), reason: str(a.shelveReason) };
  const info = (a.shelved && typeof a.shelved === 'object' ? a.shelved : null) as Obj | null;
  if (info && num(info.until) !== null) return { until: num(info.until)!, by: str(info.by), reason: str(info.reason) };
  return null;
}

/** The holds of an endpoint-state payload (invalid entries dropped). */
function holdsOf(v: unknown): EndpointHold[] {
  if (!Array.isArray(v)) return [];
  return v.flatMap((h) => {
    const o = (h && typeof h === 'object' ? h : {}) as Obj;
    const code = str(o.code);
    return code && (ENDPOINT_HOLD_CODES as readonly string[]).includes(code) ? [{ code: code as EndpointHold['code'], text: str(o.text) ?? '' }] : [];
  });
}

/** Fold in one delivered outbox event. Unknown types only advance lastEventSeq. */
export function applyEvent(prev: UnitSignalState, e: SignalEnvelope, now: number): UnitSignalState {
  const s: UnitSignalState = { ...prev, endpoint: { ...prev.endpoint }, alarms: [...prev.alarms], lastEventSeq: Math.max(prev.lastEventSeq, e.seq), updatedAt: now };
  const p = (e.payload && typeof e.payload === 'object' ? e.payload : {}) as Obj;
  const type = e.type;
  if (type === 'batch-start' || type === 'batch-started' || (type === 'batch' && p.event === 'started')) {
    const b = (p.batch && typeof p.batch === 'object' ? p.batch : p) as Obj;
    s.batch = str(b.id) ?? str(p.batch) ?? s.batch;
    s.product = str(b.product) ?? s.product;
    s.batchActive = true;
    const model = (p.model && typeof p.model === 'object' ? p.model : null) as Obj | null;
    s.modelVersion = model ? `${str(model.name) ?? str(model.versionId) ?? '?'} v${num(model.version) ?? '?'}` : (str(b.modelVersion) ?? str(p.modelVersion) ?? null);
    s.endpoint = { state: 'running', reached: false, t: null, reason: null, etaMin: null, holds: [] };
    s.progress = 0;
  } else if (type === 'batch-end' || type === 'batch-ended' || (type === 'batch' && p.event === 'ended')) {
    s.batchActive = false;
  } else if (type === 'endpoint-state' || type === 'endpoint') {
    const to = str(p.to) as EndpointState | null;
    if (to) {
      s.endpoint.state = to;
      s.endpoint.holds = to === 'held' ? holdsOf(p.holds) : [];
    }
    if (str(p.batch)) s.batch = str(p.batch);
    if (to === 'done' || (to === 'signalled' && !s.endpoint.reached)) {
      if (!s.endpoint.reached || to === 'done') {
        s.endpoint.reached = true;
        s.endpoint.t = num(p.t) ?? e.createdAt;
        s.endpoint.reason = str(p.reason) ?? '';
      }
    }
  } else if (type === 'alarm') {
    // The server writes an 'alarm' row for every alarm change (its payload: { alarm, previousState });
    // 'condition' rows (the monitor's raw condition changes) are passed on but do not change alarm state.
    const a = (p.alarm && typeof p.alarm === 'object' ? p.alarm : p) as Obj | undefined;
    if (a && str(a.key)) {
      const key = str(a.key)!;
      const active = typeof a.active === 'boolean' ? a.active : !!a.conditionActive;
      const state = (str(a.state) ?? str(a.to) ?? (active ? 'active-unacknowledged' : 'normal')) as AlarmState;
      const summary: UnitAlarmSummary = {
        ...(str(a.id) ? { id: str(a.id)! } : {}),
        key,
        kind: str(a.kind) ?? key,
        state,
        priority: (num(a.priority) ?? 3) as AlarmPriority,
        active,
        shelved: shelfOf(a) !== null,
        shelf: shelfOf(a),
        suppressed: a.suppressed === true || (Array.isArray(a.suppressedBy) && a.suppressedBy.length > 0),
        message: str(a.message) ?? '',
        value: num(a.value),
        limit: num(a.limit),
        t: num(p.t) ?? num(a.updatedAt) ?? e.createdAt,
      };
      s.alarms = s.alarms.filter((x) => x.key !== key);
      // standing alarms, and shelved or suppressed ones (so that the end of a shelve or of a suppression reaches the receivers too)
      if (summary.state !== 'normal' || summary.active || summary.shelved || summary.suppressed) s.alarms.push(summary);
      s.alarms.sort((x, y) => x.priority - y.priority || x.key.localeCompare(y.key));
      if (summary.kind === 'stale') s.stale = active;
      if (summary.kind === 'analyzer') {
        const others = s.alarms.some((x) => x.kind === 'analyzer' && x.active);
        s.analyzer = others ? 'failure' : (s.analyzerReported ?? 'good');
      }
    }
  } else if (type === 'analyzer-status' || type === 'analyzer') {
    const st = str(p.status) ?? str(p.ne107);
    if (st && (NE107_STATUSES as readonly string[]).includes(st)) {
      s.analyzerReported = st as Ne107Status;
      // the analyzer's own report, unless one of Tideline's analyzer alarms still stands
      s.analyzer = st !== 'failure' && s.alarms.some((x) => x.kind === 'analyzer' && x.active) ? 'failure' : (st as Ne107Status);
    }
  } else if (type === 'stale') {
    s.stale = !!p.active;
  }
  return withQuality(s);
}
