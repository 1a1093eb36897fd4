/**
 * The band at one aligned progress point over I reference batches (Nomikos & MacGregor 1995,
 * Technometrics 37:41): mean ± k·s, or the prediction interval for one new batch
 * mean ± t(1−α/2; I−1)·s·√(1 + 1/I). s uses the n − 1 denominator.
 */
import tQuantile from '@stdlib/stats-base-dists-t-quantile';

export interface Band {
  mean: number;
  sd: number;
  lower: number;
  upper: number;
}

export function meanSd(values: ArrayLike<number>): { mean: number; sd: number; n: number } {
  let n = 0;
  let s = 0;
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (Number.isFinite(v)) { s += v; n++; }
  }
  if (n === 0) return { mean: NaN, sd: NaN, n: 0 };
  const mean = s / n;
  let ss = 0;
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (Number.isFinite(v)) ss += (v - mean) * (v - mean);
  }
  return { mean, sd: n > 1 ? Math.sqrt(ss / (n - 1)) : 0, n };
}

/** mean ± k·s. */
export function sdBand(values: ArrayLike<number>, k: number): Band {
  if (!(k > 0)) throw new RangeError(`band width k must be > 0 (got ${k})`);
  const { mean, sd } = meanSd(values);
  return { mean, sd, lower: mean - k * sd, upper: mean + k * sd };
}

/**
 * Multiplier of s for one new observation from I reference values: t(p; I − 1)·√(1 + 1/I)
 * (p = 1 − α/2 for a two-sided interval, 1 − α one-sided, 1 − α/(2A) two-sided over A PCs).
 */
export function newObservationMultiplier(p: number, I: number): number {
  if (!(p > 0 && p < 1)) throw new RangeError(`quantile probability must be in (0, 1) (got ${p})`);
  if (!(I >= 2)) throw new RangeError(`a prediction interval needs at least 2 batches (got ${I})`);
  return tQuantile(p, I - 1) * Math.sqrt(1 + 1 / I);
}

/** Two-sided prediction interval for one new observation at confidence 1 − α. */
export function predictionBand(values: ArrayLike<number>, confidence: number): Band & { t: number } {
  if (!(confidence > 0 && confidence < 1)) throw new RangeError(`confidence must be in (0, 1) (got ${confidence})`);
  const { mean, sd, n } = meanSd(values);
  if (n < 2) throw new RangeError(`a prediction interval needs at least 2 batches (got ${n})`);
  const t = tQuantile(1 - (1 - confidence) / 2, n - 1);
  const half = t * sd * Math.sqrt(1 + 1 / n);
  return { mean, sd, lower: mean - half, upper: mean + half, t };
}
