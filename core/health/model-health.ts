/**
 * The health of a deployed model version over the batches it judged (pure: the caller passes the
 * per-batch figures and `now`):
 *
 * - alarm rate: confirmed alarms per batch in the latest `window` batches against the rate seen on
 *   held-out good batches at approval (the approval evidence), upper tail of a Poisson count. When
 *   no alarm was seen at approval the expected rate is floored at half an alarm over the held-out
 *   batches (common practice for a zero count, no published source).
 * - T² and Q rates: like with like — spectra beyond the limits the monitor raises its T² and Q
 *   conditions with (its alarm limits, per progress point or global as the model says), over the
 *   region it judges (after the start-up minutes). Spectra of one batch are serially correlated and
 *   those beyond a limit come clustered in a few batches, so the batch is the unit of the test: a
 *   batch leaves a limit when more than FAR_ABOVE_FACTOR × nominal α of its judged spectra are beyond
 *   it; the window's batches that leave it are compared with the batches measured the same way
 *   before deployment (held-out good batches of the approval evidence, else the reference batches at
 *   build with leave-batches-out T² and Q) by a one-sided Fisher exact test; it fails when p <
 *   testAlpha and the window's share is more than FAR_ABOVE_FACTOR × the earlier share (half a batch
 *   when none left it, as for the alarm rate). The share of spectra, with its Clopper–Pearson
 *   interval, is reported beside it, against nominal α and the earlier share.
 * - drift: an EWMA chart (λ, L of DRIFT_EWMA) per principal component on the batch-level mean score,
 *   on target 0 (the scores are centred on the reference spectra, so the reference batches' mean
 *   scores centre on 0 by construction: the target is not estimated) and standardised by the root
 *   mean square of the reference batches' own batch-level mean scores; fails while the latest EWMA
 *   is beyond its limits. The EWMA is clipped (Huber-type, DRIFT_CLIP): each batch moves it by at
 *   most λ·k sd, so an isolated faulty batch — which the monitor alarms on by itself — does not
 *   raise the drift test, while a sustained or gradual shift still carries it over its limits.
 * - bias: predicted property minus the lab values attached to the version's batches, t interval at
 *   1 − testAlpha; fails when it excludes zero.
 * - review: the periodic-review due date set at approval; fails once it has passed.
 *
 * Each test carries the figure it judges and the value at which it fails (HealthTest.value/limit),
 * so the health alarm can say both.
 */
import type { HealthDriftChart, HealthRate, HealthTest, ModelHealth } from '../api/model-life.ts';
import { clopperPearson, FAR_ABOVE_FACTOR } from '../evaluate/approval-evidence.ts';
import { DRIFT_EWMA, ewmaChart, type EwmaDesign } from './ewma.ts';
import { fisherExactGreater, poissonUpperTail, tInterval } from './exact-tests.ts';
import { leavesLimits } from './health-reference.ts';
import { normalInv } from '../stats/quantiles.ts';

export interface HealthBatch {
  id: string;
  startT: number;
  /** Judged spectra (scored; the batch-mean scores are over these). */
  spectra: number;
  /** Judged spectra in the region the monitor raises conditions in (after start-up), and those beyond its T² and Q alarm limits. */
  points: number;
  t2Beyond: number;
  qBeyond: number;
  /** Confirmed alarms of the monitor's conditions on this batch. */
  alarms: number;
  /** Mean score of each principal component over the batch's judged spectra. */
  meanScores: number[];
  /** Predicted property (at the lab sample's spectrum) minus the lab value. */
  labResiduals: number[];
}

/**
 * What the T² and Q rates are compared with: the limits the monitor raises its conditions with, and
 * the share beyond them measured like for like before deployment.
 */
export interface RateBaseline {
  /** Confidence of the monitor's T² and Q alarm limits; nominal α = 1 − confidence. */
  confidence: number;
  limits: 'local' | 'global';
  startupMin: number;
  /** Null when none is known (a model file built before it was stored, and no like-for-like approval evidence). */
  measured: { source: 'held-out' | 'reference'; batches: number; points: number; t2Beyond: number; qBeyond: number; t2Batches: number; qBatches: number } | null;
}

export interface HealthInput {
  version: { id: string; name: string; version: number; confidence: number };
  rates: RateBaseline;
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
const DAY_MS = 86_400_000;
export const HEALTH_TEST_ALPHA = 0.001;

const pct = (v: number) => `${Number((v * 100).toPrecision(3))} %`;
const fmtP = (p: number) => (p < 1e-4 ? p.toExponential(1) : p.toPrecision(2));

/** The smallest count whose Poisson upper tail at mean mu is below alpha. */
function poissonFailingCount(mu: number, alpha: number): number {
  let k = Math.ceil(mu);
  while (poissonUpperTail(k, mu) >= alpha) k++;
  return k;
}

/**
 * The smallest count of n window batches leaving the limits at which the Fisher test against kb of nb
 * fails (p < alpha and share above FAR_ABOVE_FACTOR × the baseline share); null when even n does not.
 */
export function failingBatches(n: number, kb: number, nb: number, alpha: number): number | null {
  const floor = Math.max(kb, 0.5) / nb;
  for (let k = 1; k <= n; k++) if (k / n > FAR_ABOVE_FACTOR * floor && fisherExactGreater(k, n, kb, nb) < alpha) return k;
  return null;
}

function rateTest(name: 'T²' | 'Q', recent: HealthBatch[], base: RateBaseline, alpha: number): HealthRate | null {
  const points = recent.reduce((a, b) => a + b.points, 0);
  if (points === 0) return null;
  const pick = (b: { t2Beyond: number; qBeyond: number }) => (name === 'T²' ? b.t2Beyond : b.qBeyond);
  const nominal = 1 - base.confidence;
  const beyond = recent.reduce((a, b) => a + pick(b), 0);
  const judged = recent.filter((b) => b.points > 0);
  const left = judged.filter((b) => leavesLimits(pick(b), b.points, base.confidence)).length;
  const m = base.measured;
  let test: HealthRate['batches']['test'] = null;
  let failed = false;
  if (m && m.batches > 0 && judged.length > 0) {
    const kb = name === 'T²' ? m.t2Batches : m.qBatches;
    const pValue = fisherExactGreater(left, judged.length, kb, m.batches);
    const baselineShare = Math.max(kb, 0.5) / m.batches;
    failed = pValue < alpha && left / judged.length > FAR_ABOVE_FACTOR * baselineShare;
    const k = failingBatches(judged.length, kb, m.batches, alpha);
    test = { pValue, failsAt: k };
  }
  return {
    name, beyond, points, rate: beyond / points, interval: clopperPearson(beyond, points), nominal,
    measured: m ? { source: m.source, batches: m.batches, points: m.points, beyond: pick(m), rate: m.points ? pick(m) / m.points : 0 } : null,
    confidence: base.confidence, limits: base.limits, startupMin: base.startupMin,
    batches: {
      left, of: judged.length, share: judged.length ? left / judged.length : 0, interval: judged.length ? clopperPearson(left, judged.length) : [0, 1],
      baseline: m ? { source: m.source, left: name === 'T²' ? m.t2Batches : m.qBatches, of: m.batches } : null,
      test,
    },
    failed,
  };
}

const SOURCE_WORDS = { 'held-out': 'held-out good batches at approval', reference: 'reference batches at build (leave-batches-out T² and Q)' } as const;

/**
 * Bonferroni across A charts: the width L_A at which each of A two-sided charts has 1/A of the
 * per-point tail probability one chart of width L has (normal theory), so the set keeps about the
 * false-signal rate of one chart. The upper tail of L is found by bisection on normalInv.
 */
export function bonferroniWidth(L: number, A: number): number {
  if (A <= 1) return L;
  // Lower tails (symmetry): normalInv(p) for small p keeps its precision, 1 − p would round to 1.
  let lo = 1e-300;
  let hi = 0.5;
  for (let i = 0; i < 200; i++) {
    const mid = Math.sqrt(lo * hi);
    if (-normalInv(mid) > L) lo = mid;
    else hi = mid;
  }
  return -normalInv(Math.sqrt(lo * hi) / A);
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
        : { code: 'alarm-rate', failed: alarmFailed, untested: false, value: observed, limit: poissonFailingCount(recent.length * Math.max(expected, 0.5 / input.approval!.heldOut), alpha), unit: 'alarms', text: `Alarms per batch ${perBatch.toFixed(2)} over the latest ${recent.length} batches (${observed} confirmed), against ${expected.toFixed(2)} at approval (${input.approval!.alarms} on ${input.approval!.heldOut} held-out good batches); Poisson p = ${fmtP(alarmP!)}${alarmFailed ? ': more alarms than the version showed at approval' : ''}.` },
  );

  // Batches leaving the monitor's own alarm limits, over the region it judges.
  const base = input.rates;
  const t2 = rateTest('T²', recent, base, alpha);
  const q = rateTest('Q', recent, base, alpha);
  const lim = `${Number((base.confidence * 100).toPrecision(4))} % ${base.limits === 'local' ? 'per-point ' : ''}alarm`;
  for (const [code, r, name] of [['t2-rate', t2, 'T²'], ['q-rate', q, 'Q']] as const) {
    if (r === null) {
      tests.push({ code, failed: false, untested: true, text: `${name} beyond its alarm limit: no spectrum judged yet.` });
      continue;
    }
    const spectra = `${r.beyond} of ${r.points} spectra (${pct(r.rate)}; exact 95 % interval ${pct(r.interval[0])}–${pct(r.interval[1])}; nominal ${pct(r.nominal)}${r.measured ? `, ${pct(r.measured.rate)} on the ${SOURCE_WORDS[r.measured.source]}` : ''}) judged after ${base.startupMin} min are beyond the ${lim} ${name} limit`;
    const bt = r.batches;
    const leftText = `${bt.left} of ${bt.of} batches left it (more than ${FAR_ABOVE_FACTOR}× nominal of their spectra beyond)`;
    if (bt.test === null || bt.baseline === null) {
      tests.push({ code, failed: false, untested: true, text: `${spectra}; ${leftText}. Not tested: no like-for-like rate before deployment (a model file built before it was stored, and no evaluation on held-out good batches counted as the monitor judges) — evaluate the version on held-out good batches.` });
      continue;
    }
    tests.push({
      code, failed: r.failed, untested: false, value: bt.left, limit: bt.test.failsAt, unit: 'batches',
      text: `${spectra}; ${leftText}, against ${bt.baseline.left} of ${bt.baseline.of} ${SOURCE_WORDS[bt.baseline.source]}; one-sided Fisher exact p = ${fmtP(bt.test.pValue)}${bt.test.failsAt === null ? '' : `; fails from ${bt.test.failsAt} of ${bt.of}`}${r.failed ? `: more batches leave the ${name} limit than before deployment` : ''}.`,
    });
  }

  // Drift of the batch-level mean scores.
  let drift: ModelHealth['drift'] = null;
  const refs = input.referenceMeanScores.filter((r) => r.every(Number.isFinite));
  const nPc = refs[0]?.length ?? 0;
  const judged = all.filter((b) => b.spectra > 0 && b.meanScores.length >= nPc && b.meanScores.slice(0, nPc).every(Number.isFinite));
  if (refs.length >= 3 && nPc > 0) {
    const charts: HealthDriftChart[] = [];
    // One chart per PC: each at the Bonferroni width, so that the set signals on good batches about as rarely as one chart of width L.
    const LA = bonferroniWidth(design.L, nPc);
    for (let a = 0; a < nPc; a++) {
      const sd = rmsAboutZero(refs.map((r) => r[a]!));
      if (!(sd > 0)) continue;
      const c = ewmaChart(judged.map((b) => b.meanScores[a]! / sd), 0, 1, { lambda: design.lambda, L: LA, ...(design.clip !== undefined ? { clip: design.clip } : {}) });
      const last = c.ewma.length - 1;
      charts.push({ pc: a + 1, ewma: c.ewma, limit: c.halfWidth, firstSignal: c.firstSignal, signalling: last >= 0 && Math.abs(c.ewma[last]!) > c.halfWidth[last]! });
    }
    const failed = charts.some((c) => c.signalling);
    drift = {
      lambda: design.lambda, L: design.L, LPerChart: LA, baselineBatches: refs.length, charts, failed,
      method: `EWMA (λ = ${design.lambda}, L = ${design.L}; Lucas & Saccucci 1990, NIST/SEMATECH handbook 6.3.2.4) of each PC's batch-mean score${design.clip !== undefined ? `, clipped (Huber-type robust EWMA): each batch's deviation from the previous EWMA value is limited to ±${design.clip} sd before smoothing, so one outlying batch moves it by at most ${Number((design.lambda * design.clip).toPrecision(3))} sd` : ''}, on target 0 (PCA scores are centred on the reference spectra) and standardised by the root mean square of the ${refs.length} reference batches' batch-mean scores; exact (time-varying) limits. ${nPc} charts, each at the Bonferroni width L = ${LA.toFixed(2)} (the per-point tail of L = ${design.L} shared among them), so the set signals on good batches about as rarely as one chart.`,
    };
    const sig = charts.filter((c) => c.signalling).map((c) => `PC${c.pc}`);
    // The chart furthest out at the latest batch: its |EWMA| and its limit (sd of the reference batch means).
    let worst: { v: number; l: number } | null = null;
    for (const c of charts) {
      const i = c.ewma.length - 1;
      if (i < 0) continue;
      const v = Math.abs(c.ewma[i]!);
      if (!worst || v / c.limit[i]! > worst.v / worst.l) worst = { v, l: c.limit[i]! };
    }
    tests.push({ code: 'drift', failed, untested: judged.length === 0, ...(worst ? { value: worst.v, limit: worst.l, unit: 'sd' } : {}), text: judged.length === 0 ? 'Drift: no batch judged yet.' : failed ? `Drift: the EWMA of the batch-mean score of ${sig.join(', ')} is beyond its limits after ${judged.length} batches: the process has moved away from the reference batches.` : `Drift: the EWMA of every PC's batch-mean score is within its limits over ${judged.length} batches.` });
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
    tests.push({ code: 'bias', failed, untested: false, value: Math.abs(t.mean), limit: (t.interval[1] - t.interval[0]) / 2, unit: input.property.unit, text: `Bias of predicted ${input.property.name}: ${t.mean.toPrecision(3)} ${input.property.unit} over ${t.n} lab values (${pct(conf)} t interval ${t.interval[0].toPrecision(3)} to ${t.interval[1].toPrecision(3)})${failed ? ': the prediction is biased' : ''}.` });
  } else {
    tests.push({ code: 'bias', failed: false, untested: true, text: input.property ? `Bias: ${residuals.length} lab value(s) attached to the version's batches; at least 2 needed.` : 'Bias: the version predicts no property.' });
  }

  // Periodic review.
  const overdue = input.review.dueAt !== null && input.now > input.review.dueAt;
  tests.push({ code: 'review', failed: overdue, untested: input.review.dueAt === null, ...(input.review.dueAt !== null ? (input.review.intervalDays !== null ? { value: input.review.intervalDays + (input.now - input.review.dueAt) / DAY_MS, limit: input.review.intervalDays, unit: 'days since approval' } : { value: (input.now - input.review.dueAt) / DAY_MS, limit: 0, unit: 'days past due' }) : {}), text: input.review.dueAt === null ? 'Periodic review: no due date was set at approval.' : `Periodic review due ${new Date(input.review.dueAt).toISOString().slice(0, 10)}${overdue ? ': overdue' : ''}.` });

  return {
    versionId: input.version.id,
    name: input.version.name,
    version: input.version.version,
    units: input.units,
    batches: all.map((b) => ({ id: b.id, startT: b.startT, spectra: b.spectra, points: b.points, t2Beyond: b.t2Beyond, qBeyond: b.qBeyond, alarms: b.alarms })),
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
    method: `Rates over the latest ${window} batches judged by the version; tests at p < ${alpha}. T² and Q: spectra from ${base.startupMin} min into each batch beyond the ${lim} limits the monitor raises its conditions with. Spectra within a batch are serially correlated and those beyond a limit come in a few batches, so the test counts batches: a batch leaves a limit when more than ${FAR_ABOVE_FACTOR}× nominal of its spectra are beyond it; the window's batches are compared with the batches measured the same way before deployment by a one-sided Fisher exact test, and fail only when their share is also more than ${FAR_ABOVE_FACTOR}× the earlier one (half a batch when none left it).`,
  };
}

/** A judged result as stored (alarmLimits is absent in results stored before alarm limits existed). */
export interface HealthResult {
  t2: number;
  q: number;
  elapsedMin: number;
  limits: { t2: number; q: number };
  localLimits?: { t2: number; q: number } | null;
  alarmLimits?: { t2: number; q: number };
  scores: number[];
  quality?: { judged: boolean };
}

/**
 * Batch-level figures of one batch from its judged results (the caller reads them from storage):
 * the spectra beyond the limits the monitor judged each one with (its alarmLimits; in results
 * stored before those existed, the per-point or global limits as `limits` says), counted only from
 * `startupMin` on, where the monitor raises conditions.
 */
export function healthBatchFigures(results: Iterable<HealthResult>, judging: { startupMin: number; limits: 'local' | 'global' }): { spectra: number; points: number; t2Beyond: number; qBeyond: number; meanScores: number[] } {
  let n = 0;
  let points = 0;
  let t2b = 0;
  let qb = 0;
  let sums: number[] = [];
  for (const r of results) {
    if (r.quality?.judged === false || !Number.isFinite(r.t2)) continue;
    if (n === 0) sums = new Array(r.scores.length).fill(0);
    n++;
    for (let a = 0; a < sums.length; a++) sums[a] = sums[a]! + (r.scores[a] ?? 0);
    if (!(r.elapsedMin >= judging.startupMin)) continue;
    const lim = r.alarmLimits ?? (judging.limits === 'local' && r.localLimits ? r.localLimits : r.limits);
    points++;
    if (r.t2 > lim.t2) t2b++;
    if (r.q > lim.q) qb++;
  }
  return { spectra: n, points, t2Beyond: t2b, qBeyond: qb, meanScores: sums.map((v) => v / n) };
}
