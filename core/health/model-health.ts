/**
 * The health of a deployed model version over the batches it judged (pure: the caller passes the
 * per-batch figures and `now`):
 *
 * - alarm rate: confirmed alarms per batch in the latest `window` batches against the rate seen on
 *   held-out good batches at approval (the approval evidence), upper tail of a Poisson count. When
 *   no alarm was seen at approval the expected rate is floored at half an alarm over the held-out
 *   batches (common practice for a zero count, no published source).
 * - T² and Q rates: share of judged spectra beyond the drawn limits in the window against the
 *   nominal α = 1 − confidence, exact two-sided binomial test with its Clopper–Pearson 95 % interval.
 *   Spectra of one batch are serially correlated, so, as in the approval evidence, the test fails
 *   only when p < testAlpha AND the rate exceeds FAR_ABOVE_FACTOR × α.
 * - drift: an EWMA chart (λ, L of DRIFT_EWMA) per principal component on the batch-level mean score,
 *   on target 0 (the scores are centred on the reference spectra, so the reference batches' mean
 *   scores centre on 0 by construction: the target is not estimated) and standardised by the root
 *   mean square of the reference batches' own batch-level mean scores; fails while the latest EWMA
 *   is beyond its limits.
 * - bias: predicted property minus the lab values attached to the version's batches, t interval at
 *   1 − testAlpha; fails when it excludes zero.
 * - review: the periodic-review due date set at approval; fails once it has passed.
 */
import type { HealthDriftChart, HealthRate, HealthTest, ModelHealth } from '../api/model-life.ts';
import { clopperPearson, FAR_ABOVE_FACTOR } from '../evaluate/approval-evidence.ts';
import { DRIFT_EWMA, ewmaChart, type EwmaDesign } from './ewma.ts';
import { binomialTestTwoSided, poissonUpperTail, tInterval } from './exact-tests.ts';

export interface HealthBatch {
  id: string;
  startT: number;
  /** Judged spectra, and those beyond the drawn T² and Q limits. */
  spectra: number;
  t2Beyond: number;
  qBeyond: number;
  /** Confirmed alarms of the monitor's conditions on this batch. */
  alarms: number;
  /** Mean score of each principal component over the batch's judged spectra. */
  meanScores: number[];
  /** Predicted property (at the lab sample's spectrum) minus the lab value. */
  labResiduals: number[];
}

export interface HealthInput {
  version: { id: string; name: string; version: number; confidence: number };
  units: string[];
  /** Chronological. */
  batches: HealthBatch[];
  /** From the approval evidence: confirmed alarms on held-out good batches, and how many batches. */
  approval: { alarms: number; heldOut: number } | null;
  /** Batch-level mean scores of the reference batches (one row per batch). */
  referenceMeanScores: number[][];
  property: { name: string; unit: string } | null;
  review: { dueAt: number | null; intervalDays: number | null };
  now: number;
  window?: number;
  testAlpha?: number;
  ewma?: EwmaDesign;
}

export const HEALTH_WINDOW = 20;
export const HEALTH_TEST_ALPHA = 0.001;

const pct = (v: number) => `${Number((v * 100).toPrecision(3))} %`;
const fmtP = (p: number) => (p < 1e-4 ? p.toExponential(1) : p.toPrecision(2));

function rateTest(name: string, beyond: number, points: number, nominal: number, alpha: number): HealthRate | null {
  if (points === 0) return null;
  const rate = beyond / points;
  const pValue = binomialTestTwoSided(beyond, points, nominal);
  return { name, beyond, points, rate, nominal, interval: clopperPearson(beyond, points), pValue, failed: pValue < alpha && rate > FAR_ABOVE_FACTOR * nominal };
}

/** Root mean square about zero: the scores are centred on the reference spectra, so their batch means centre on 0 by construction. */
function rmsAboutZero(xs: number[]): number {
  return Math.sqrt(xs.reduce((a, b) => a + b * b, 0) / xs.length);
}

export function modelHealth(input: HealthInput): ModelHealth {
  const window = input.window ?? HEALTH_WINDOW;
  const alpha = input.testAlpha ?? HEALTH_TEST_ALPHA;
  const design = input.ewma ?? DRIFT_EWMA;
  const all = input.batches;
  const recent = all.slice(Math.max(0, all.length - window));
  const tests: HealthTest[] = [];
  const nominal = 1 - input.version.confidence;
  const lim = `${Number((input.version.confidence * 100).toPrecision(4))} %`;

  // Confirmed alarms per batch against the approval rate.
  const observed = recent.reduce((a, b) => a + b.alarms, 0);
  const perBatch = recent.length ? observed / recent.length : 0;
  let expected: number | null = null;
  let alarmP: number | null = null;
  let alarmFailed = false;
  if (input.approval && input.approval.heldOut > 0) {
    expected = input.approval.alarms / input.approval.heldOut;
    if (recent.length) {
      const floor = 0.5 / input.approval.heldOut;
      alarmP = poissonUpperTail(observed, recent.length * Math.max(expected, floor));
      alarmFailed = alarmP < alpha;
    }
  }
  tests.push(
    expected === null
      ? { code: 'alarm-rate', failed: false, untested: true, text: 'Alarms per batch: no approval evidence on held-out good batches to compare with.' }
      : !recent.length
        ? { code: 'alarm-rate', failed: false, untested: true, text: 'Alarms per batch: no batch judged yet.' }
        : { code: 'alarm-rate', failed: alarmFailed, untested: false, text: `Alarms per batch ${perBatch.toFixed(2)} over the latest ${recent.length} batches (${observed} confirmed), against ${expected.toFixed(2)} at approval (${input.approval!.alarms} on ${input.approval!.heldOut} held-out good batches); Poisson p = ${fmtP(alarmP!)}${alarmFailed ? ': more alarms than the version showed at approval' : ''}.` },
  );

  // Shares beyond the drawn limits.
  const points = recent.reduce((a, b) => a + b.spectra, 0);
  const t2 = rateTest('T²', recent.reduce((a, b) => a + b.t2Beyond, 0), points, nominal, alpha);
  const q = rateTest('Q', recent.reduce((a, b) => a + b.qBeyond, 0), points, nominal, alpha);
  for (const [code, r, name] of [['t2-rate', t2, 'T²'], ['q-rate', q, 'Q']] as const) {
    tests.push(
      r === null
        ? { code, failed: false, untested: true, text: `${name} beyond its limit: no spectrum judged yet.` }
        : { code, failed: r.failed, untested: false, text: `${pct(r.rate)} of ${r.points} spectra beyond the ${lim} ${name} limit (exact 95 % interval ${pct(r.interval[0])}–${pct(r.interval[1])}) against ${pct(nominal)} nominal; exact binomial p = ${fmtP(r.pValue)}${r.failed ? `: more than ${FAR_ABOVE_FACTOR}× nominal` : ''}.` },
    );
  }

  // Drift of the batch-level mean scores.
  let drift: ModelHealth['drift'] = null;
  const refs = input.referenceMeanScores.filter((r) => r.every(Number.isFinite));
  const nPc = refs[0]?.length ?? 0;
  const judged = all.filter((b) => b.spectra > 0 && b.meanScores.length >= nPc && b.meanScores.slice(0, nPc).every(Number.isFinite));
  if (refs.length >= 3 && nPc > 0) {
    const charts: HealthDriftChart[] = [];
    for (let a = 0; a < nPc; a++) {
      const sd = rmsAboutZero(refs.map((r) => r[a]!));
      if (!(sd > 0)) continue;
      const c = ewmaChart(judged.map((b) => b.meanScores[a]! / sd), 0, 1, design);
      const last = c.ewma.length - 1;
      charts.push({ pc: a + 1, ewma: c.ewma, limit: c.halfWidth, firstSignal: c.firstSignal, signalling: last >= 0 && Math.abs(c.ewma[last]!) > c.halfWidth[last]! });
    }
    const failed = charts.some((c) => c.signalling);
    drift = {
      lambda: design.lambda, L: design.L, baselineBatches: refs.length, charts, failed,
      method: `EWMA (λ = ${design.lambda}, L = ${design.L}; Lucas & Saccucci 1990, NIST/SEMATECH handbook 6.3.2.4) of each PC's batch-mean score, on target 0 (PCA scores are centred on the reference spectra) and standardised by the root mean square of the ${refs.length} reference batches' batch-mean scores; exact (time-varying) limits. With ${charts.length} charts the in-control run length of the set is shorter than that of one chart.`,
    };
    const sig = charts.filter((c) => c.signalling).map((c) => `PC${c.pc}`);
    tests.push({ code: 'drift', failed, untested: judged.length === 0, text: judged.length === 0 ? 'Drift: no batch judged yet.' : failed ? `Drift: the EWMA of the batch-mean score of ${sig.join(', ')} is beyond its limits after ${judged.length} batches: the process has moved away from the reference batches.` : `Drift: the EWMA of every PC's batch-mean score is within its limits over ${judged.length} batches.` });
  } else {
    tests.push({ code: 'drift', failed: false, untested: true, text: `Drift: needs at least 3 reference batches stored to set its baseline (${refs.length} found).` });
  }

  // Property bias against lab values attached later.
  let bias: ModelHealth['bias'] = null;
  const residuals = all.flatMap((b) => b.labResiduals).filter(Number.isFinite);
  if (input.property && residuals.length >= 2) {
    const conf = 1 - alpha;
    const t = tInterval(residuals, conf);
    const failed = t.interval[0] > 0 || t.interval[1] < 0;
    bias = { property: input.property.name, unit: input.property.unit, n: t.n, mean: t.mean, interval: t.interval, confidence: conf, failed };
    tests.push({ code: 'bias', failed, untested: false, text: `Bias of predicted ${input.property.name}: ${t.mean.toPrecision(3)} ${input.property.unit} over ${t.n} lab values (${pct(conf)} t interval ${t.interval[0].toPrecision(3)} to ${t.interval[1].toPrecision(3)})${failed ? ': the prediction is biased' : ''}.` });
  } else {
    tests.push({ code: 'bias', failed: false, untested: true, text: input.property ? `Bias: ${residuals.length} lab value(s) attached to the version's batches; at least 2 needed.` : 'Bias: the version predicts no property.' });
  }

  // Periodic review.
  const overdue = input.review.dueAt !== null && input.now > input.review.dueAt;
  tests.push({ code: 'review', failed: overdue, untested: input.review.dueAt === null, text: input.review.dueAt === null ? 'Periodic review: no due date was set at approval.' : `Periodic review due ${new Date(input.review.dueAt).toISOString().slice(0, 10)}${overdue ? ': overdue' : ''}.` });

  return {
    versionId: input.version.id,
    name: input.version.name,
    version: input.version.version,
    units: input.units,
    batches: all.map((b) => ({ id: b.id, startT: b.startT, spectra: b.spectra, t2Beyond: b.t2Beyond, qBeyond: b.qBeyond, alarms: b.alarms })),
    window,
    alarms: { observed, batches: recent.length, perBatch, expectedPerBatch: expected, heldOut: input.approval?.heldOut ?? 0, pValue: alarmP, failed: alarmFailed },
    t2,
    q,
    drift,
    bias,
    review: { dueAt: input.review.dueAt, intervalDays: input.review.intervalDays, overdue },
    tests,
    failed: tests.some((t) => t.failed),
    testAlpha: alpha,
    method: `Rates over the latest ${window} batches judged by the version; tests at p < ${alpha}. Spectra within a batch are serially correlated, so a T² or Q rate fails only when it is also more than ${FAR_ABOVE_FACTOR}× nominal.`,
  };
}

/** Batch-level figures of one batch from its judged results (the caller reads them from storage). */
export function healthBatchFigures(results: Iterable<{ t2: number; q: number; limits: { t2: number; q: number }; scores: number[]; quality?: { judged: boolean } }>): { spectra: number; t2Beyond: number; qBeyond: number; meanScores: number[] } {
  let n = 0;
  let t2b = 0;
  let qb = 0;
  let sums: number[] = [];
  for (const r of results) {
    if (r.quality?.judged === false || !Number.isFinite(r.t2)) continue;
    if (n === 0) sums = new Array(r.scores.length).fill(0);
    n++;
    if (r.t2 > r.limits.t2) t2b++;
    if (r.q > r.limits.q) qb++;
    for (let a = 0; a < sums.length; a++) sums[a] = sums[a]! + (r.scores[a] ?? 0);
  }
  return { spectra: n, t2Beyond: t2b, qBeyond: qb, meanScores: sums.map((s) => s / n) };
}
