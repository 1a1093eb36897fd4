/**
 * A model's life after approval, as the REST API serves it: shadow runs of a candidate version
 * beside the deployed one and their comparison (core/shadow), and the health of a deployed version
 * (core/health). Types only. Rule for changes: add, never rename.
 */

/** A candidate version judging a unit's live spectra in shadow: stored apart, never signalled or annunciated. */
export interface ShadowRun {
  id: string;
  unit: string;
  versionId: string;
  name: string;
  version: number;
  /** The version deployed on the unit when the run started (the one compared against). */
  deployedVersionId: string | null;
  startedAt: number;
  startedBy: string;
  reason: string | null;
  endedAt: number | null;
  endedBy: string | null;
  endReason: string | null;
  /** Batches the candidate judged in shadow so far. */
  batches: number;
}

/** One side (deployed or candidate) of one batch in a shadow comparison. */
export interface ShadowSide {
  versionId: string | null;
  /** Spectra judged. */
  spectra: number;
  /** Confirmed alarms raised (condition changes to active, after the on-delay). */
  alarms: number;
  /** Condition keys that were active at some point, sorted (e.g. 'q', 't2', 'pc1'). */
  conditions: string[];
  /** Time the endpoint was called (state done), ms epoch; null when not called. */
  endpointAt: number | null;
  /** Predicted property against the lab values of the batch: root mean square and mean of (predicted − lab); null without lab values or prediction. */
  lab: { n: number; rmse: number; bias: number } | null;
}

export interface ShadowBatchComparison {
  batch: string;
  startT: number;
  deployed: ShadowSide;
  candidate: ShadowSide;
  /** Conditions active under one version and never under the other. */
  onlyDeployed: string[];
  onlyCandidate: string[];
  /** Candidate's endpoint minus the deployed one's, minutes; null unless both called it. */
  endpointDifferenceMin: number | null;
}

export interface ShadowComparison {
  run: ShadowRun;
  batches: ShadowBatchComparison[];
  summary: {
    batches: number;
    deployedAlarmsPerBatch: number;
    candidateAlarmsPerBatch: number;
    /** Batches where a condition was caught by one version and not the other. */
    batchesOnlyDeployed: number;
    batchesOnlyCandidate: number;
    /** Batches where both called the endpoint, and the difference (candidate − deployed) over them, minutes. */
    endpointBoth: number;
    endpointOnlyDeployed: number;
    endpointOnlyCandidate: number;
    endpointMeanDifferenceMin: number | null;
    endpointMaxAbsDifferenceMin: number | null;
    /** Pooled over every lab value: n, RMSE and bias of each version's prediction. */
    labDeployed: { n: number; rmse: number; bias: number } | null;
    labCandidate: { n: number; rmse: number; bias: number } | null;
    /** One line per finding, in plain words. */
    text: string[];
  };
  method: string;
}

/** One test of model health and whether it fails now. */
export interface HealthTest {
  /** 'alarm-rate' | 't2-rate' | 'q-rate' | 'drift' | 'bias' | 'review' */
  code: string;
  failed: boolean;
  /** Not enough data to test (e.g. no lab values, no approval evidence). */
  untested: boolean;
  text: string;
  /** The figure the test judges and the value at which it fails (null: it cannot fail on this window), in `unit`; absent when untested. */
  value?: number;
  limit?: number | null;
  unit?: string;
}

export interface HealthRate {
  name: string;
  beyond: number;
  points: number;
  rate: number;
  /** Nominal α of the limits counted against (1 − confidence). */
  nominal: number;
  /** The same share measured before deployment (null: not known). */
  measured: { source: 'held-out' | 'reference'; batches: number; points: number; beyond: number; rate: number } | null;
  /** The limits counted against: the monitor's alarm limits, per progress point or global, from startupMin on. */
  confidence: number;
  limits: 'local' | 'global';
  startupMin: number;
  /** Clopper–Pearson two-sided 95 % interval of the share of spectra. */
  interval: [number, number];
  /**
   * The test, on batches: those of the window that leave the limit (more than 2× nominal of their
   * judged spectra beyond it) against those measured the same way before deployment; one-sided
   * Fisher exact p, and the count at which the test fails. test null: no baseline, untested.
   */
  batches: {
    left: number;
    of: number;
    share: number;
    interval: [number, number];
    baseline: { source: 'held-out' | 'reference'; left: number; of: number } | null;
    test: { pValue: number; failsAt: number | null } | null;
  };
  failed: boolean;
}

export interface HealthDriftChart {
  /** Principal component, 1-based. */
  pc: number;
  /** EWMA of the standardised batch-mean score, one per batch (chronological). */
  ewma: number[];
  /** Control limits ±L·σ_EWMA(i) at each batch (exact, not asymptotic). */
  limit: number[];
  /** Index into batches of the first batch beyond the limits, or null. */
  firstSignal: number | null;
  /** Beyond the limits at the latest batch. */
  signalling: boolean;
}

export interface ModelHealth {
  versionId: string;
  name: string;
  version: number;
  /** Units the version is deployed to now. */
  units: string[];
  /** Batches judged by the version, and the window the rate tests use (the latest ones). */
  /** spectra: judged; points: judged after start-up (the rate tests' spectra); t2Beyond/qBeyond among points, beyond the alarm limits. */
  batches: { id: string; startT: number; spectra: number; points: number; t2Beyond: number; qBeyond: number; alarms: number }[];
  window: number;
  alarms: { observed: number; batches: number; perBatch: number; expectedPerBatch: number | null; heldOut: number; pValue: number | null; failed: boolean };
  t2: HealthRate | null;
  q: HealthRate | null;
  /** L: the design's width; LPerChart: each chart's (Bonferroni over the PCs). */
  drift: { lambda: number; L: number; LPerChart: number; baselineBatches: number; charts: HealthDriftChart[]; failed: boolean; method: string } | null;
  bias: { property: string; unit: string; n: number; mean: number; interval: [number, number]; confidence: number; failed: boolean } | null;
  review: { dueAt: number | null; intervalDays: number | null; overdue: boolean };
  tests: HealthTest[];
  /** True when any test fails (the health alarm stands). */
  failed: boolean;
  testAlpha: number;
  method: string;
}

/** GET /api/shadow-runs: every run asked for, newest first (not paged: a site has few). */
export interface ShadowRunList {
  items: ShadowRun[];
  total: number;
  limit: number;
  offset: number;
}
