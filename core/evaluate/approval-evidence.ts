/**
 * The evidence an approver sees for a model version: its replay on held-out good batches (stored
 * batches that are not among its reference batches and that the evaluator did not mark faulty).
 *
 * - Share of points beyond the T² and the Q limit (the version's limits, e.g. 99 %) against the
 *   nominal rate 1 − confidence, with the exact (Clopper & Pearson 1934) two-sided 95 % interval
 *   for a binomial proportion. Points of one batch are serially correlated, so the interval is too
 *   narrow as a test; it is read together with a practical margin: a rate is "far above nominal"
 *   when the nominal rate lies below the interval AND the observed rate is more than
 *   FAR_ABOVE_FACTOR times it (common practice, no published source). Far below nominal (limits
 *   too wide, insensitive) is a warning that does not block.
 * - The worst batch (largest share of points beyond either limit), good batches that raised alarms,
 *   the endpoint reached on n of m good batches, and the early calls of the version's
 *   leave-one-batch-out endpoint check on its reference batches.
 * Pure: no I/O.
 */
import type { ApprovalEvidence, ApprovalWarning, BatchEvaluation, RateEvidence } from '../api/rest.ts';
import { clopperPearson as exactInterval } from '../stats/clopper-pearson.ts';
import { leavesLimits } from '../health/health-reference.ts';

/** A point rate more than this many times the nominal rate (and outside its interval) is far above it. */
export const FAR_ABOVE_FACTOR = 2;
/** A point rate below nominal / this (and outside its interval) is far below it. */
export const FAR_BELOW_FACTOR = 4;
/** Confidence of the exact binomial interval shown. */
export const INTERVAL_CONFIDENCE = 0.95;

/** Clopper–Pearson exact interval (core/stats/clopper-pearson.ts), at INTERVAL_CONFIDENCE unless told. */
export function clopperPearson(k: number, n: number, confidence = INTERVAL_CONFIDENCE): [number, number] {
  return exactInterval(k, n, confidence);
}

const pct = (v: number) => `${Number((v * 100).toPrecision(3))} %`;

function rate(beyond: number, points: number, nominal: number, name: string): RateEvidence {
  if (points === 0) return { name, beyond: 0, points: 0, rate: 0, interval: [0, 1], farAbove: false, farBelow: false };
  const r = beyond / points;
  const interval = clopperPearson(beyond, points);
  return { name, beyond, points, rate: r, interval, farAbove: interval[0] > nominal && r > FAR_ABOVE_FACTOR * nominal, farBelow: interval[1] < nominal && r < nominal / FAR_BELOW_FACTOR };
}

export function approvalEvidence(input: {
  evaluationId: string;
  createdAt: number;
  confidence: number;
  batches: BatchEvaluation[];
  /** Batches the evaluator marked as known faulty (left out of the rates). */
  faulty: readonly string[];
  /** The version's reference batches (not held out: left out of the rates). */
  references: readonly string[];
  /** Early calls of the version's leave-one-batch-out endpoint check, with its sentence. */
  earlyCalls: { count: number; text: string | null };
}): ApprovalEvidence {
  const nominal = 1 - input.confidence;
  const faulty = new Set(input.faulty);
  const refs = new Set(input.references);
  const excluded: ApprovalEvidence['excluded'] = [];
  const good: BatchEvaluation[] = [];
  for (const b of input.batches) {
    if (faulty.has(b.batch)) excluded.push({ batch: b.batch, why: 'marked faulty' });
    else if (refs.has(b.batch)) excluded.push({ batch: b.batch, why: 'reference batch of this version (not held out)' });
    else good.push(b);
  }
  const points = good.reduce((a, b) => a + b.spectra, 0);
  const t2 = rate(good.reduce((a, b) => a + (b.t2Beyond ?? 0), 0), points, nominal, 'T²');
  const q = rate(good.reduce((a, b) => a + (b.qBeyond ?? 0), 0), points, nominal, 'Q');
  let worst: ApprovalEvidence['worst'] = null;
  for (const b of good) {
    const share = b.spectra ? b.pointsOutside / b.spectra : 0;
    if (!worst || share > worst.share) worst = { batch: b.batch, spectra: b.spectra, beyond: b.pointsOutside, share };
  }
  // As the monitor judges, for model health (core/health): summed, and the batches that leave each limit.
  const gj = good.map((b) => b.judged);
  const conf = gj[0]?.confidence;
  const judged = gj.length && gj.every((j) => j && j.confidence === conf)
    ? {
        batches: gj.length, confidence: conf!, points: gj.reduce((a, j) => a + j!.points, 0), t2Beyond: gj.reduce((a, j) => a + j!.t2Beyond, 0), qBeyond: gj.reduce((a, j) => a + j!.qBeyond, 0),
        t2Batches: gj.filter((j) => leavesLimits(j!.t2Beyond, j!.points, conf!)).length, qBatches: gj.filter((j) => leavesLimits(j!.qBeyond, j!.points, conf!)).length,
      }
    : undefined;
  const notReached = good.filter((b) => b.endpointAt === null).map((b) => b.batch);
  const alarmed = good.filter((b) => b.alarms > 0).map((b) => ({ batch: b.batch, alarms: b.alarms, firstKind: b.firstAlarmKind }));
  const warnings: ApprovalWarning[] = [];
  const lim = `${Number((input.confidence * 100).toPrecision(4))} %`;
  if (good.length === 0) warnings.push({ code: 'no-held-out', blocking: false, text: 'No held-out good batch was evaluated: the point rates below are not known. Evaluate the version on good batches that are not among its reference batches.' });
  for (const r of [t2, q]) {
    if (r.farAbove) {
      warnings.push({ code: r.name === 'T²' ? 't2-rate' : 'q-rate', blocking: true, text: `${pct(r.rate)} of the points of the held-out good batches are beyond the ${lim} ${r.name} limit (${r.beyond} of ${r.points}; exact 95 % interval ${pct(r.interval[0])}–${pct(r.interval[1])}), where about ${pct(nominal)} is expected: on good batches this version would alarm far more often than its limits say.` });
    } else if (r.farBelow) {
      warnings.push({ code: r.name === 'T²' ? 't2-rate-low' : 'q-rate-low', blocking: false, text: `Only ${pct(r.rate)} of the points of the held-out good batches are beyond the ${lim} ${r.name} limit (${r.beyond} of ${r.points}; exact 95 % interval ${pct(r.interval[0])}–${pct(r.interval[1])}), where about ${pct(nominal)} is expected: the limit may be too wide to catch a fault early.` });
    }
  }
  if (worst && worst.spectra > 0 && worst.share > Math.max(0.05, 5 * nominal)) {
    warnings.push({ code: 'worst-batch', blocking: false, text: `Good batch ${worst.batch} has ${worst.beyond} of ${worst.spectra} points (${pct(worst.share)}) beyond a limit.` });
  }
  if (alarmed.length) warnings.push({ code: 'good-batch-alarmed', blocking: false, text: `${alarmed.length} of ${good.length} held-out good batches raised alarms: ${alarmed.map((a) => `${a.batch} (${a.alarms})`).join(', ')}.` });
  if (good.length && notReached.length) warnings.push({ code: 'endpoint-not-reached', blocking: false, text: `The endpoint was reached on ${good.length - notReached.length} of ${good.length} held-out good batches; not on ${notReached.join(', ')}.` });
  if (input.earlyCalls.count > 0) warnings.push({ code: 'early-endpoint', blocking: false, text: `Endpoint check on the reference batches: ${input.earlyCalls.text ?? `${input.earlyCalls.count} early calls`} (approval needs its own override).` });
  return {
    evaluationId: input.evaluationId,
    evaluatedAt: input.createdAt,
    confidence: input.confidence,
    nominalRate: nominal,
    heldOutGood: good.map((b) => b.batch),
    excluded,
    points,
    t2,
    q,
    ...(judged ? { judged } : {}),
    worst,
    alarmedGood: alarmed,
    endpoint: { reached: good.length - notReached.length, of: good.length, notReached },
    earlyCalls: input.earlyCalls,
    warnings,
    method: `Points beyond the version's ${lim} limits on held-out good batches (not reference batches, not marked faulty), against the nominal ${pct(nominal)}; exact Clopper–Pearson 95 % interval. Points within a batch are serially correlated, so a rate is called far above nominal only when the nominal rate lies below the interval and the rate exceeds ${FAR_ABOVE_FACTOR}× nominal.`,
  };
}
