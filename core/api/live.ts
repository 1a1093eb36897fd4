/**
 * Tideline live push, WebSocket `/live`, version 1 — message types.
 *
 * Types only. Text frames, one JSON object each. Rule for changes: add, never rename.
 *
 * Flow:
 * 1. On connect the server sends {@link LiveWelcome}.
 * 2. The client sends {@link LiveSubscribe} with a scope: the whole plant, one unit, or one batch.
 *    A new subscribe replaces the previous one.
 * 3. The server answers with one {@link LiveSnapshot} for that scope, then deltas as they happen.
 *    Every server message after the snapshot carries `subscription` (echo of the client's id) and a
 *    per-connection `n` counting up by one, so a client sees when messages were dropped.
 *
 * Slow clients: each connection has a bounded queue. When it fills, the server coalesces: per unit
 * it keeps only the latest `unit` status, per alarm only the latest `alarm` state, per batch only the
 * latest `endpoint`; per-spectrum `result` messages that no longer fit are dropped and replaced by
 * one {@link LiveGap} naming the seq range missed (fetch them from
 * `GET /api/batches/:batch/results?fromSeq=&toSeq=`). Ingest never waits for a browser.
 *
 * Scope contents:
 * - plant: snapshot has every unit and every active (or unacknowledged or shelved) alarm; deltas are
 *   `unit`, `alarm`, `endpoint`, `batch`. No per-spectrum results (the unit status carries the latest
 *   compact point).
 * - unit: as plant for that unit only, plus `result` for its open batch, and `batch` when a batch starts or ends.
 * - batch: snapshot includes all results so far (up to `maxResults`, oldest dropped first, with
 *   `truncatedBefore`); deltas `result`, `alarm`, `endpoint`, `unit`, `batch` for that batch and its unit.
 */
import type { AlarmState, EndpointState, EndpointStatus, MonitorResult } from '../monitor/types.ts';
import type { Alarm, BatchSummary, ModelRef, UnitSummary } from './rest.ts';

export const LIVE_PROTOCOL_VERSION = 1;
export const LIVE_PATH = '/live';

export type LiveScope = { kind: 'plant' } | { kind: 'unit'; unit: string } | { kind: 'batch'; batch: string };

// ---- client -> server -------------------------------------------------------------------------

export interface LiveSubscribe {
  type: 'subscribe';
  /** Client-chosen id echoed back on every message of this subscription. */
  id: string;
  scope: LiveScope;
  /** Batch scope: at most this many results in the snapshot (default 5000, max 50000). */
  maxResults?: number;
}

export interface LiveUnsubscribe {
  type: 'unsubscribe';
}

/** Application-level ping (browsers cannot send WebSocket pings); answered with `pong`. */
export interface LivePing {
  type: 'ping';
  t?: number;
}

export type LiveClientMessage = LiveSubscribe | LiveUnsubscribe | LivePing;

// ---- server -> client -------------------------------------------------------------------------

export interface LiveWelcome {
  type: 'welcome';
  protocol: typeof LIVE_PROTOCOL_VERSION;
  serverTime: number;
  /** Capacity of this connection's queue, messages. */
  queueLimit: number;
}

/** A compact view of one result, used in unit status (plant view). */
export interface LivePoint {
  seq: number;
  t: number;
  elapsedMin: number;
  progressFraction: number;
  t2: number;
  q: number;
  t2Limit: number;
  qLimit: number;
  /** First two scores (fewer if the model has fewer). */
  scores: number[];
  envelopeOutside: boolean;
  prediction: { name: string; unit: string; value: number } | null;
  suspect: boolean;
}

/** Unit status as pushed live: the REST summary plus the latest compact point. */
export interface LiveUnitStatus extends UnitSummary {
  latest: LivePoint | null;
}

interface LiveEnvelope {
  /** Echo of LiveSubscribe.id. */
  subscription: string;
  /** Per-connection message counter, +1 per message. */
  n: number;
  serverTime: number;
}

export interface LiveSnapshot extends LiveEnvelope {
  type: 'snapshot';
  scope: LiveScope;
  units: LiveUnitStatus[];
  /** Alarms that are active, unacknowledged or shelved, within scope; for batch scope, all alarms of the batch. */
  alarms: Alarm[];
  /** Batch scope (or unit scope with an open batch): the batch. */
  batch: BatchSummary | null;
  /** Batch scope (or unit scope with an open batch): results so far, in seq order. */
  results: MonitorResult[];
  /** When results were cut to maxResults: the first seq not included before them; else null. */
  truncatedBefore: number | null;
  model: ModelRef | null;
}

export interface LiveResult extends LiveEnvelope {
  type: 'result';
  unit: string;
  batch: string;
  result: MonitorResult;
}

export interface LiveAlarm extends LiveEnvelope {
  type: 'alarm';
  /** Alarm after the change. */
  alarm: Alarm;
  /** State before the change; null for a new alarm. */
  previousState: AlarmState | null;
}

export interface LiveEndpoint extends LiveEnvelope {
  type: 'endpoint';
  unit: string;
  batch: string;
  from: EndpointState;
  to: EndpointState;
  endpoint: EndpointStatus;
  t: number;
  seq: number;
}

/** Unit status changed (incl. running → stale, connection changes, new deployment, latest point). */
export interface LiveUnit extends LiveEnvelope {
  type: 'unit';
  unit: LiveUnitStatus;
}

/** A batch started, ended, or its summary changed. */
export interface LiveBatch extends LiveEnvelope {
  type: 'batch';
  event: 'started' | 'ended' | 'updated';
  batch: BatchSummary;
}

/** Results the client did not get because its queue was full; fetch them by REST. */
export interface LiveGap extends LiveEnvelope {
  type: 'gap';
  unit: string;
  batch: string;
  fromSeq: number;
  toSeq: number;
}

export interface LivePong {
  type: 'pong';
  t: number | null;
  serverTime: number;
}

export interface LiveError {
  type: 'error';
  /** 'bad-json' | 'bad-message' | 'unknown-unit' | 'unknown-batch' | 'internal' */
  code: string;
  message: string;
}

export type LiveServerMessage =
  | LiveWelcome
  | LiveSnapshot
  | LiveResult
  | LiveAlarm
  | LiveEndpoint
  | LiveUnit
  | LiveBatch
  | LiveGap
  | LivePong
  | LiveError;
