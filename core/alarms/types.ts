/**
 * Alarm records and events of the ISA-18.2 / IEC 62682 alarm life cycle.
 *
 * The process condition (is T² beyond its limit, after the monitor's on-delay, off-delay and
 * deadband?) is decided in core/monitor and arrives here as a ConditionChange. This module adds what
 * the operator sees and does: acknowledgement, shelving, suppression by state, priority and a
 * chattering count. Everything here is pure: every time is passed in (ms since the Unix epoch).
 *
 * Tideline advises; the site's validated control strategy, interlocks and procedures decide what
 * an alarm may do.
 */
import type { AlarmKind, AlarmPriority, AlarmState, ConditionChange } from '../monitor/types.ts';

/** A condition as it enters the life cycle: the monitor's ConditionChange, or a server-side one (stale data, analyzer fault). */
export type AlarmCondition = Omit<ConditionChange, 'kind'> & { kind: AlarmKind };

/** Why an alarm is suppressed by design (ISA-18.2 "suppressed by design", state based). */
export const SUPPRESSION_REASONS = ['no-batch', 'function-check'] as const;
export type SuppressionReason = (typeof SUPPRESSION_REASONS)[number];

export interface ShelveInfo {
  by: string;
  at: number;
  until: number;
  reason: string;
}

export interface AlarmRecord {
  key: string;
  kind: AlarmKind;
  priority: AlarmPriority;
  /** Life-cycle state as annunciated. 'normal' while shelved or suppressed. */
  state: AlarmState;
  /** The process condition itself, whatever the annunciation. */
  conditionActive: boolean;
  message: string;
  value: number;
  limit: number;
  /** When the condition last became active (null while it is not active). */
  activeSince: number | null;
  lastChangeAt: number;
  ackedBy: string | null;
  ackedAt: number | null;
  shelved: ShelveInfo | null;
  suppressedBy: SuppressionReason[];
  /** Activation times inside the chattering window (kept short, oldest first). */
  activations: number[];
  chattering: boolean;
}

/** The operating context that drives suppression by state. */
export interface AlarmContext {
  batchRunning: boolean;
  /** NAMUR NE 107 'function check' (maintenance, calibration) reported by the analyzer. */
  functionCheck: boolean;
}

/** All alarms of one unit; plain JSON so the server can persist it. */
export interface AlarmBook {
  unit: string;
  context: AlarmContext;
  alarms: Record<string, AlarmRecord>;
}

export type AlarmCause =
  | 'condition'
  | 'acknowledge'
  | 'shelve'
  | 'unshelve'
  | 'shelve-expired'
  | 'suppress'
  | 'unsuppress'
  | 'chattering';

/** An observable change of one alarm (state, shelving, suppression or chattering flag), for the outbox. */
export interface AlarmEvent {
  type: 'alarm';
  unit: string;
  key: string;
  kind: AlarmKind;
  priority: AlarmPriority;
  from: AlarmState;
  to: AlarmState;
  cause: AlarmCause;
  t: number;
  conditionActive: boolean;
  shelved: ShelveInfo | null;
  suppressedBy: SuppressionReason[];
  chattering: boolean;
  message: string;
  value: number;
  limit: number;
  user?: string;
  reason?: string;
}

export interface AlarmSettings {
  /** Longest a shelve may last, ms (ISA-18.2 requires shelving to be time-limited). */
  maxShelveMs: number;
  /** Chattering window, ms, and activations within it that count as chattering. */
  chatterWindowMs: number;
  chatterActivations: number;
  /** Which kinds are suppressed when no batch runs / when the analyzer is in function check. */
  suppressWithoutBatch: AlarmKind[];
  suppressInFunctionCheck: AlarmKind[];
}

/**
 * Defaults. Chattering as ≥ 3 activations within 60 s follows ANSI/ISA-18.2-2016 (and ISA-TR18.2.5)
 * as quoted in the issue; an 8 h maximum shelve (one shift) is common practice, no published source.
 */
export const DEFAULT_ALARM_SETTINGS: AlarmSettings = {
  maxShelveMs: 8 * 3600_000,
  chatterWindowMs: 60_000,
  chatterActivations: 3,
  suppressWithoutBatch: ['t2', 'q', 'combined', 'envelope', 'property'],
  suppressInFunctionCheck: ['t2', 'q', 'combined', 'envelope', 'property', 'stale'],
};

export interface AlarmStep {
  book: AlarmBook;
  events: AlarmEvent[];
}

/** An operator action that the life cycle refuses (nothing to acknowledge, shelve too long, …). */
export class AlarmActionError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'AlarmActionError';
  }
}
