/**
 * The health reference of a model version, computed at build from its reference batches and stored
 * in the model file (meta.health, covered by the file's hash), so a server need not replay the
 * reference batches to judge the version's health (docs/model-life.md):
 *
 * - the batch-mean score of each principal component per reference batch (the drift chart's
 *   baseline), over the batch's kept spectra;
 * - the share of reference spectra beyond the limits the monitor raises its T² and Q conditions
 *   with (the alarm limits, per progress point or global as settings.alarms.limits says), over the
 *   region it judges (from settings.alarms.startupMin on), each spectrum taken with its
 *   leave-batches-out T² and Q (core/model/group-cv-statistics.ts: a reference spectrum judged by a
 *   model that did not see its batch, as a new batch is). This is the rate the health test expects
 *   of good batches when it is above the nominal α of those limits.
 *
 * Pure; O(spectra).
 */
import type { Envelope } from '../envelope/envelope.ts';
import { gridIndex } from '../envelope/envelope.ts';

/** FAR_ABOVE_FACTOR of core/evaluate/approval-evidence.ts, repeated here to keep this file free of imports. */
const FAR_ABOVE = 2;

/**
 * Whether a batch leaves a limit: more than FAR_ABOVE × nominal α of its judged spectra beyond it
 * (a batch of 350 spectra at 99.9 % leaves it with one spectrum beyond; one of 3,000 with seven).
 */
export function leavesLimits(beyond: number, points: number, confidence: number): boolean {
  return beyond > 0 && beyond > FAR_ABOVE * (1 - confidence) * points;
}

export interface JudgedRate {
  /** Confidence of the limits counted against (the alarm limits'), and whether they are per progress point. */
  confidence: number;
  limits: 'local' | 'global';
  /** Conditions are judged from this many minutes into a batch (settings.alarms.startupMin). */
  startupMin: number;
  /** Spectra in the judged region, and those beyond the T² and the Q limit. */
  points: number;
  t2Beyond: number;
  qBeyond: number;
  batches: number;
  /** Batches that leave the T² and the Q limit (leavesLimits). */
  t2Batches: number;
  qBatches: number;
}

export interface HealthReference {
  /** One row per reference batch: the mean score of each PC over its kept spectra. */
  meanScores: number[][];
  /** The rate beyond the alarm limits over the judged region, leave-batches-out T² and Q. */
  judged: JudgedRate;
  method: string;
}

export interface HealthReferenceTrajectory {
  elapsedMin: ArrayLike<number>;
  progress: ArrayLike<number>;
  /** scores[a][i]: in-sample score of PC a at spectrum i. */
  scores: ArrayLike<number>[];
  /** Leave-batches-out T² and Q per spectrum. */
  t2: ArrayLike<number>;
  q: ArrayLike<number>;
}

export function healthReference(
  refs: HealthReferenceTrajectory[],
  env: Envelope,
  alarm: { confidence: number; local: boolean; startupMin: number; t2: number; q: number; t2Local: ArrayLike<number>; qLocal: ArrayLike<number> },
): HealthReference {
  const meanScores = refs.map((r) => r.scores.map((s) => {
    let sum = 0;
    for (let i = 0; i < s.length; i++) sum += s[i]!;
    return s.length ? sum / s.length : NaN;
  }));
  let points = 0;
  let t2b = 0;
  let qb = 0;
  let t2Batches = 0;
  let qBatches = 0;
  for (const r of refs) {
    const p0 = points;
    const t0 = t2b;
    const q0 = qb;
    for (let i = 0; i < r.elapsedMin.length; i++) {
      if (!(r.elapsedMin[i]! >= alarm.startupMin)) continue;
      const k = alarm.local ? gridIndex(env, r.progress[i]!) : -1;
      const lt2 = k >= 0 ? alarm.t2Local[k]! : alarm.t2;
      const lq = k >= 0 ? alarm.qLocal[k]! : alarm.q;
      points++;
      if (r.t2[i]! > lt2) t2b++;
      if (r.q[i]! > lq) qb++;
    }
    if (leavesLimits(t2b - t0, points - p0, alarm.confidence)) t2Batches++;
    if (leavesLimits(qb - q0, points - p0, alarm.confidence)) qBatches++;
  }
  const conf = `${+(alarm.confidence * 100).toFixed(3)} %`;
  return {
    meanScores,
    judged: { confidence: alarm.confidence, limits: alarm.local ? 'local' : 'global', startupMin: alarm.startupMin, points, t2Beyond: t2b, qBeyond: qb, batches: refs.length, t2Batches, qBatches },
    method: `Reference batches at build: batch-mean scores over the kept spectra; spectra from ${alarm.startupMin} min on beyond the ${conf} ${alarm.local ? 'per-progress-point' : 'global'} alarm limits, each with its leave-batches-out T² and Q.`,
  };
}
