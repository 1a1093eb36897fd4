/**
 * The contract of the batch monitor: what core/ returns for each spectrum, and what server/, web/
 * and the signal channels read. Implementations live beside this file (batch-monitor.ts) and in
 * core/envelope, core/endpoint; this file holds types only.
 *
 * Times are ms since the Unix epoch (UTC) unless a name says otherwise (…Min = minutes).
 */

/**
 * Endpoint states, in order. 'held': the rule is met and confirmed but a guard stands (minimum
 * time not reached, a confirmed alarm standing, the property prediction outside its calibration);
 * never signalled as done. 'signalled' is set by the server once the signal has gone out.
 */
export const ENDPOINT_STATES = ['running', 'nearing', 'settling', 'held', 'done', 'signalled'] as const;
export type EndpointState = (typeof ENDPOINT_STATES)[number];

/** Why a met and confirmed endpoint is held (state 'held'). */
export const ENDPOINT_HOLD_CODES = ['min-elapsed', 'alarm', 'extrapolating'] as const;
export type EndpointHoldCode = (typeof ENDPOINT_HOLD_CODES)[number];
export interface EndpointHold {
  code: EndpointHoldCode;
  /** Plain words, e.g. 'T² above its limit (alarm standing since 10:42)'. */
  text: string;
}

/**
 * Conditions the monitor itself raises (on-delay / off-delay applied in core). 'analyzer': the
 * analyzer-quality condition (repeated bad pixels, core/quality/pixel-quality.ts); the server
 * raises other analyzer alarms of the same kind.
 */
export const CONDITION_KINDS = ['t2', 'q', 'combined', 'envelope', 'property', 'analyzer'] as const;
export type ConditionKind = (typeof CONDITION_KINDS)[number];

/**
 * Alarm kinds known to the whole system: the monitor's conditions plus server-side ones.
 * 'model-health': a test of the deployed version's health failed (docs/model-life.md); low priority, unit-level.
 * 'signal': a signal channel went on past a hole in the unit's outbox sequence, so an event for the
 * control system may have been lost (docs/signals.md); unit-level.
 */
export type AlarmKind = ConditionKind | 'stale' | 'analyzer' | 'model-health' | 'signal';

/** ISA-18.2 alarm states; shelving is a separate flag with an expiry. */
export const ALARM_STATES = ['normal', 'active-unacknowledged', 'active-acknowledged', 'cleared-unacknowledged'] as const;
export type AlarmState = (typeof ALARM_STATES)[number];

export type AlarmPriority = 1 | 2 | 3 | 4; // 1 = highest

/**
 * 'unjudged': the point is not compared with the envelope — the PC is the progress indicator
 * itself, too few golden batches reached this progress, or their spread here is zero.
 */
export type EnvelopeStatus = 'inside' | 'above' | 'below' | 'unjudged';

export interface EnvelopeCheck {
  /** Principal component, 1-based. */
  pc: number;
  score: number;
  expected: number;
  lower: number;
  upper: number;
  status: EnvelopeStatus;
  /** (score − expected) / sd at this progress point; null where the golden sd is zero or unknown. */
  sd: number | null;
}

/** A change of a monitor condition (after on-delay / off-delay). The server feeds these to the alarm life cycle. */
export interface ConditionChange {
  kind: ConditionKind;
  /** e.g. 'pc1' for an envelope condition, otherwise equal to kind. */
  key: string;
  active: boolean;
  /** Human-readable: what crossed which limit, by how much. */
  message: string;
  value: number;
  limit: number;
  priority: AlarmPriority;
}

export interface EndpointCriterionStatus {
  /** 'property' | 'mbsd' | 'plateau' | 'golden-end' */
  criterion: string;
  met: boolean;
  value: number | null;
  threshold: number;
  /** e.g. 'moisture 1.8 % w/w ≤ 2.0 % w/w' */
  text: string;
}

export interface EndpointStatus {
  state: EndpointState;
  criteria: EndpointCriterionStatus[];
  combine: 'all' | 'any';
  confirmCount: number;
  confirmNeeded: number;
  /** Time to endpoint, minutes, with a spread (from the golden trajectories); null when unknown or done. */
  etaMin: { median: number; low: number; high: number } | null;
  /** Set once state reaches 'done': the time and seq of the spectrum that completed confirmation. */
  doneAt: { t: number; seq: number; reason: string } | null;
  /** The guards holding the endpoint: non-empty exactly when state is 'held'. Absent in results stored before holds existed (none). */
  holds?: EndpointHold[];
}

export interface PropertyPrediction {
  name: string; // 'moisture', 'conversion'
  unit: string; // '% w/w', '%'
  value: number;
  /** The PLS X-model's own T² and Q for this spectrum, and whether the prediction extrapolates. */
  t2: number;
  q: number;
  extrapolating: boolean;
}

/**
 * Pixel quality of a spectrum with bad pixels (absent on a clean spectrum): the named flags
 * (core/quality/pixel-quality.ts), how the spectrum was judged. judged false: too damaged to judge
 * — stored, but scores, T², Q, envelope and prediction are NaN/empty and no condition or endpoint
 * state moved.
 */
export interface SpectrumQuality {
  /** Bad pixels per named flag (a pixel can carry several flags). */
  flags: { 'non-finite': number; saturated: number; dead: number; stuck: number; spike: number };
  /** Pixels with any flag, and their share of the spectrum. */
  badPixels: number;
  badFraction: number;
  /** Indices (raw axis) of the first bad pixels, at most 32. */
  pixels: number[];
  /** Model variables (after preprocessing) treated as missing. */
  missingVariables: number;
  judged: boolean;
  /**
   * 'tsr': projected with the missing variables by trimmed score regression; 'full': the bad pixels
   * reach no model variable, ordinary projection; null when not judged.
   */
  scoredBy: 'tsr' | 'full' | null;
  /** Why a spectrum was not judged. */
  reason?: string;
}

export interface MonitorResult {
  seq: number;
  t: number;
  /** Minutes since batch start. */
  elapsedMin: number;
  /** Batch progress on the envelope's axis: minutes, or the indicator variable's value. */
  progress: number;
  /** 0…1 fraction of the golden batch's course, for display. */
  progressFraction: number;
  scores: number[];
  t2: number;
  q: number;
  combined: number;
  limits: { t2: number; q: number; combined: number; confidence: number };
  /** Per-progress-point limits from the envelope, when the model has them. */
  localLimits: { t2: number; q: number } | null;
  /**
   * The limits in force for the alarm conditions at this spectrum (per-point or global, as the
   * model's alarms.limits says) and their confidence: equal to the drawn limits unless the model
   * has action limits (settings.alarms.confidence); envelopeK in sd of the band. Absent in results
   * stored before alarm limits existed.
   */
  alarmLimits?: { t2: number; q: number; envelopeK: number; confidence: number };
  envelope: EnvelopeCheck[];
  /** Pace against the golden batches (core/monitor/pace.ts) when the model judges it; null where not judged. */
  pace?: { tookMin: number; expectedMin: number; upperMin: number; z: number } | null;
  prediction: PropertyPrediction | null;
  /** A single out-of-limit point that did not (yet) raise an alarm. */
  suspect: boolean;
  conditionChanges: ConditionChange[];
  /** Conditions active after this spectrum (keys). */
  activeConditions: string[];
  endpoint: EndpointStatus;
  /** Domain events caused by this spectrum, for the outbox. */
  events: DomainEvent[];
  /** Present when the spectrum had bad pixels. */
  quality?: SpectrumQuality;
}

/** Contributions of each variable (after preprocessing, on the model axis) for one spectrum. */
export interface Contributions {
  axis: number[]; // nm of the model variables
  t2: number[]; // Westerhuis et al. 2000, sums to T²
  q: number[]; // e_j², sums to Q
  rbcT2: number[]; // Alcala & Qin 2009
  rbcQ: number[];
  /**
   * Summed over wavelength regions (band assignments; regions do not overlap and hold every
   * variable): t2 the signed sum, t2Abs the sum of |T² contribution| (T² contributions can be
   * negative, so shares of T² are taken of Σ|c|), q the sum of e².
   */
  regions: { name: string; from: number; to: number; assignment: string; t2: number; q: number; t2Abs: number }[];
}

/** Events emitted by core for the outbox (server adds id and per-unit sequence). */
export type DomainEvent =
  /** holds: the guards holding the endpoint when `to` is 'held' (empty otherwise; absent in events stored before holds existed). from = to = 'held' when the reasons changed. */
  | { type: 'endpoint-state'; from: EndpointState; to: EndpointState; t: number; seq: number; reason: string; holds?: EndpointHold[] }
  | { type: 'condition'; change: ConditionChange; t: number; seq: number };
