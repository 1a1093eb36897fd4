/**
 * The golden-batch envelope: for every principal component score, the expected value and a band
 * at each point of batch progress, built from the reference batches (Nomikos & MacGregor 1995,
 * Technometrics 37:41); per-progress-point T² and Q limits besides the global ones; and, for the
 * time-to-endpoint estimate, the time at which each reference batch reached each progress point.
 */
import fQuantile from '@stdlib/stats-base-dists-f-quantile';
import chisqQuantile from '@stdlib/stats-base-dists-chisquare-quantile';
import { meanSd } from './band.ts';
import { momentLimit } from './moment-limit.ts';
import type { ProgressAxis } from './progress.ts';

/** One reference batch, already projected: everything per spectrum. */
export interface ReferenceTrajectory {
  elapsedMin: ArrayLike<number>;
  progress: ArrayLike<number>;
  /** scores[a][i]: score on PC a+1 of spectrum i. */
  scores: ArrayLike<number>[];
  t2: ArrayLike<number>;
  q: ArrayLike<number>;
  /** Index of the spectrum at which this batch reached its known endpoint; null when it has none (never assumed). */
  endIndex: number | null;
}

export interface EnvelopeOptions {
  /** Band half-width in standard deviations. */
  k: number;
  /** Half-width, in grid points, of the centred moving average applied to mean and sd (0 = none). */
  smoothing: number;
  /** Number of progress points. */
  points: number;
  /** Confidence of the per-point T²/Q limits and the end-region limit. */
  confidence: number;
  /** Global limits, used where too few reference spectra fall near a progress point. */
  globalT2Limit: number;
  globalQLimit: number;
  /** Also per-point T²/Q limits at this confidence (alarm limits), with the global ones at it. */
  alarm?: { confidence: number; globalT2Limit: number; globalQLimit: number };
}

export interface PcEnvelope {
  mean: number[];
  sd: number[];
  lower: number[];
  upper: number[];
}

export interface Envelope {
  axis: ProgressAxis;
  /** Uniform progress grid: minutes or indicator values. */
  grid: number[];
  /** Reference batches that passed through each grid point. */
  count: number[];
  k: number;
  smoothing: number;
  nBatches: number;
  pcs: PcEnvelope[];
  t2Limit: number[];
  qLimit: number[];
  /** Per-point limits at the alarm confidence (model.alarmLimits), when it differs. */
  t2AlarmLimit?: number[];
  qAlarmLimit?: number[];
  /** timeAtProgress[b][k]: minutes since start at which reference batch b reached grid point k (null = never). */
  timeAtProgress: (number | null)[][];
  /** Minutes from start to each reference batch's known endpoint (null: none known). */
  endMin: (number | null)[];
  /** Progress each reference batch had at its known endpoint (null: none known). */
  endProgress: (number | null)[];
  /** The golden end region: score mean and sd over the reference batches at their known endpoints (null: fewer than 2 known). */
  endRegion: { mean: number[]; sd: number[]; limit: number; method: string } | null;
}

/** Value of a trajectory where its progress first reaches g (linear interpolation); NaN if never. */
function valueAtProgress(progress: ArrayLike<number>, values: ArrayLike<number>, g: number): number {
  const n = progress.length;
  if (n === 0) return NaN;
  if (g < progress[0]) return NaN; // the batch started beyond this point
  if (g === progress[0]) return values[0];
  for (let i = 1; i < n; i++) {
    if (progress[i] >= g) {
      const p0 = progress[i - 1];
      const p1 = progress[i];
      if (p1 <= p0) return values[i];
      const f = (g - p0) / (p1 - p0);
      return values[i - 1] + f * (values[i] - values[i - 1]);
    }
  }
  return NaN;
}

/** Centred moving average of half-width h, ignoring NaN (h = 0 returns a copy). */
export function smoothSeries(x: ArrayLike<number>, h: number): number[] {
  const n = x.length;
  const out = new Array<number>(n);
  for (let i = 0; i < n; i++) {
    let s = 0;
    let c = 0;
    for (let j = Math.max(0, i - h); j <= Math.min(n - 1, i + h); j++) {
      if (Number.isFinite(x[j])) { s += x[j]; c++; }
    }
    out[i] = c > 0 ? s / c : NaN;
  }
  return out;
}

function median(xs: number[]): number {
  const s = xs.filter(Number.isFinite).sort((a, b) => a - b);
  if (s.length === 0) return NaN;
  const m = s.length >> 1;
  return s.length % 2 ? s[m] : (s[m - 1] + s[m]) / 2;
}

export function buildEnvelope(refs: ReferenceTrajectory[], axis: ProgressAxis, opts: EnvelopeOptions): Envelope {
  const I = refs.length;
  if (I < 2) throw new RangeError(`an envelope needs at least 2 reference batches (got ${I})`);
  if (!Number.isInteger(opts.points) || opts.points < 2) throw new RangeError(`envelope points must be an integer ≥ 2 (got ${opts.points})`);
  if (!Number.isInteger(opts.smoothing) || opts.smoothing < 0) throw new RangeError(`envelope smoothing must be an integer ≥ 0 (got ${opts.smoothing})`);
  if (!(opts.k > 0)) throw new RangeError(`envelope k must be > 0 (got ${opts.k})`);
  const A = refs[0].scores.length;
  for (const [b, r] of refs.entries()) {
    if (r.scores.length !== A) throw new RangeError(`reference batch ${b} has ${r.scores.length} score series; batch 0 has ${A}`);
    if (r.progress.length === 0) throw new RangeError(`reference batch ${b} has no spectra`);
  }
  // Grid: from the earliest starting progress to the furthest final progress; each point keeps the
  // number of batches that passed through it (time axis: all batches start at 0).
  const g0 = Math.min(...refs.map((r) => r.progress[0]));
  const g1 = Math.max(...refs.map((r) => r.progress[r.progress.length - 1]));
  if (!(g1 > g0)) throw new RangeError(`reference batches show no progress (start ${g0}, end ${g1}); choose another progress variable`);
  const P = opts.points;
  const step = (g1 - g0) / (P - 1);
  const grid = Array.from({ length: P }, (_, k) => g0 + k * step);

  const count = grid.map((g) => refs.filter((r) => Number.isFinite(valueAtProgress(r.progress, r.elapsedMin, g))).length);
  const pcs: PcEnvelope[] = [];
  for (let a = 0; a < A; a++) {
    const mean = new Array<number>(P);
    const sd = new Array<number>(P);
    const col = new Float64Array(I);
    for (let k = 0; k < P; k++) {
      for (let b = 0; b < I; b++) col[b] = valueAtProgress(refs[b].progress, refs[b].scores[a], grid[k]);
      const s = meanSd(col);
      mean[k] = s.mean;
      sd[k] = s.sd;
    }
    const m = smoothSeries(mean, opts.smoothing);
    const s = smoothSeries(sd, opts.smoothing);
    // Carry known values into points no batch (or only one) reached, from either side.
    for (let k = 1; k < P; k++) {
      if (!Number.isFinite(m[k])) m[k] = m[k - 1];
      if (!Number.isFinite(s[k])) s[k] = s[k - 1];
    }
    for (let k = P - 2; k >= 0; k--) {
      if (!Number.isFinite(m[k])) m[k] = m[k + 1];
      if (!Number.isFinite(s[k])) s[k] = s[k + 1];
    }
    pcs.push({ mean: m, sd: s, lower: m.map((v, k) => v - opts.k * s[k]), upper: m.map((v, k) => v + opts.k * s[k]) });
  }

  // Per-point limits: pool the reference spectra whose progress lies within the window.
  const half = Math.max(1, opts.smoothing) * step;
  const t2Limit = new Array<number>(P);
  const qLimit = new Array<number>(P);
  const al = opts.alarm;
  const t2AlarmLimit = al ? new Array<number>(P) : undefined;
  const qAlarmLimit = al ? new Array<number>(P) : undefined;
  const poolT2: number[] = [];
  const poolQ: number[] = [];
  for (let k = 0; k < P; k++) {
    poolT2.length = 0;
    poolQ.length = 0;
    // The end points also pool everything beyond them (the monitor clamps progress to the grid).
    const lo = k === 0 ? -Infinity : grid[k] - half;
    const hi = k === P - 1 ? Infinity : grid[k] + half;
    for (const r of refs) {
      for (let i = 0; i < r.progress.length; i++) {
        const p = r.progress[i];
        if (p >= lo && p <= hi) { poolT2.push(r.t2[i]); poolQ.push(r.q[i]); }
      }
    }
    t2Limit[k] = poolT2.length >= 10 ? momentLimit(poolT2, opts.confidence) : opts.globalT2Limit;
    qLimit[k] = poolQ.length >= 10 ? momentLimit(poolQ, opts.confidence) : opts.globalQLimit;
    if (al) {
      t2AlarmLimit![k] = poolT2.length >= 10 ? momentLimit(poolT2, al.confidence) : al.globalT2Limit;
      qAlarmLimit![k] = poolQ.length >= 10 ? momentLimit(poolQ, al.confidence) : al.globalQLimit;
    }
  }

  const timeAtProgress = refs.map((r) => grid.map((g) => {
    const v = valueAtProgress(r.progress, r.elapsedMin, g);
    return Number.isFinite(v) ? v : null;
  }));
  const endAt = (r: ReferenceTrajectory) => (r.endIndex === null ? null : Math.min(r.endIndex, r.progress.length - 1));
  const endMin = refs.map((r) => { const e = endAt(r); return e === null ? null : r.elapsedMin[e]; });
  const endProgress = refs.map((r) => { const e = endAt(r); return e === null ? null : r.progress[e]; });
  const endRegion = goldenEndRegion(refs.flatMap((r) => { const e = endAt(r); return e === null ? [] : [r.scores.map((s) => s[e])]; }), A, opts.confidence);
  return {
    axis,
    grid,
    count,
    k: opts.k,
    smoothing: opts.smoothing,
    nBatches: I,
    pcs,
    t2Limit,
    qLimit,
    ...(al ? { t2AlarmLimit, qAlarmLimit } : {}),
    timeAtProgress,
    endMin,
    endProgress,
    endRegion,
  };
}

/**
 * The golden end region from the scores of the reference batches at their known endpoints
 * (end[b][a]): mean and sd per PC and the limit of a Hotelling-type distance. Null with fewer than
 * 2 known endpoints.
 */
export function goldenEndRegion(end: ArrayLike<number>[], A: number, confidence: number): Envelope['endRegion'] {
  const I = end.length;
  if (I < 2) return null;
  const endMean: number[] = [];
  const endSd: number[] = [];
  for (let a = 0; a < A; a++) {
    const s = meanSd(end.map((e) => e[a]));
    endMean.push(s.mean);
    endSd.push(s.sd);
  }
  let limit: number;
  let method: string;
  if (I > A + 1) {
    // Hotelling T² for one new observation from I reference points (Tracy, Young & Mason 1992).
    limit = ((A * (I - 1) * (I + 1)) / (I * (I - A))) * fQuantile(confidence, A, I - A);
    method = `Hotelling T² of a new observation, F-based (Tracy, Young & Mason 1992), diagonal covariance, from the ${I} known endpoints`;
  } else {
    limit = chisqQuantile(confidence, A);
    method = `chi-square(A) (${I} known endpoints: too few for the F form)`;
  }
  return { mean: endMean, sd: endSd, limit, method };
}

/** Index of the grid point nearest to a progress value (clamped to the grid). */
export function gridIndex(env: Envelope, progress: number): number {
  const g = env.grid;
  const P = g.length;
  const step = (g[P - 1] - g[0]) / (P - 1);
  const k = Math.round((progress - g[0]) / step);
  return k < 0 ? 0 : k >= P ? P - 1 : k;
}

/**
 * Progress at which the golden batches reached their endpoint (median over the reference batches
 * with a known endpoint). With none known, the end of the grid: the progress shown and the pace
 * then run over the whole golden course (no endpoint is assumed from it).
 */
export function goldenEndProgress(env: Envelope): number {
  const s = env.endProgress.filter((v): v is number => v !== null).sort((a, b) => a - b);
  if (s.length === 0) return env.grid[env.grid.length - 1];
  const m = s.length >> 1;
  return s.length % 2 ? s[m] : (s[m - 1] + s[m]) / 2;
}

/**
 * For each reference batch, the first grid point it reached (it started beyond the points before;
 * grid.length when it reached none): those points give no time for a stretch that starts there.
 */
export function firstReachedPoint(env: Pick<Envelope, 'timeAtProgress'>): Int32Array {
  return Int32Array.from(env.timeAtProgress, (row) => {
    const i = row.findIndex((v) => v !== null);
    return i < 0 ? row.length : i;
  });
}

/** Fraction 0…1 of the golden course: from the start of the grid to the golden endpoint. */
export function progressFraction(env: Envelope, progress: number, endProgress = goldenEndProgress(env)): number {
  const g0 = env.grid[0];
  const span = endProgress - g0;
  if (!(span > 0)) return 1;
  const f = (progress - g0) / span;
  return f < 0 ? 0 : f > 1 ? 1 : f;
}
