/**
 * EWMA control chart (Roberts 1959; design by Lucas & Saccucci 1990; NIST/SEMATECH e-Handbook of
 * Statistical Methods, section 6.3.2.4): z_i = λ·x_i + (1 − λ)·z_{i−1}, z_0 = μ0, with the exact
 * limits μ0 ± L·σ·√(λ/(2 − λ)·(1 − (1 − λ)^{2i})) (they widen to the asymptotic ones).
 *
 * With `clip` set it is a Huber-type robust EWMA: z_i = z_{i−1} + λ·ψ_k(x_i − z_{i−1}), ψ_k(e) =
 * max(−kσ, min(kσ, e)) (Huber's ψ; robust exponential smoothing in this form: Cipra 1992, J.
 * Forecasting 11:57 — from memory). The limits are the plain EWMA's: clipping only shrinks the steps,
 * and a seeded Monte Carlo on N(0,1) sequences (test/health/exact-tests.test.ts) checks that the
 * in-control signal rate stays at or below the plain chart's.
 */

export interface EwmaDesign {
  /** Weight of the newest value, 0 < λ ≤ 1. */
  lambda: number;
  /** Width of the limits in σ of the EWMA. */
  L: number;
  /**
   * Huber-type clipping (robust EWMA): when set, each step's deviation from the previous EWMA value,
   * x_i − z_{i−1}, is limited to ±clip·σ before smoothing, so one outlying point moves the EWMA by
   * at most λ·clip·σ while a sustained shift still moves it step by step. Unset: the plain EWMA.
   */
  clip?: number;
}

/**
 * k of the drift chart's Huber-type clipping, in σ of the standardised batch-mean score: a single
 * faulty batch (wrong material, agglomeration — which the monitor alarms on by itself) moves the EWMA
 * by at most λ·k = 0.3 σ, a quarter of the 2-PC chart's asymptotic limit, instead of λ times its full
 * distance (often tens of σ). k = 1.5 is within the range usual for Huber's ψ (about 1–2; Huber 1964,
 * Ann. Math. Stat. 35:73 — from memory), not a published choice for this chart; it was chosen on the
 * seeded simulations in test/health/exact-tests.test.ts (in-control rate at or below the plain chart's,
 * a 1-in-4 faulty mix quiet, a slow shift still caught).
 */
export const DRIFT_CLIP = 1.5;

/**
 * Tideline's design for the batch-level drift chart: λ = 0.2, L = 3. Lucas & Saccucci (1990) tabulate
 * an in-control average run length of about 560 for this pair and quick detection of shifts of one
 * standard deviation (ARL about 10) — values from memory of their Table 3; the Monte Carlo in the
 * tests checks the in-control rate.
 */
export const DRIFT_EWMA: EwmaDesign = { lambda: 0.2, L: 3, clip: DRIFT_CLIP };

export interface EwmaChart {
  ewma: number[];
  /** Half-width of the limits at each point (σ units of x times L times the EWMA factor). */
  halfWidth: number[];
  lower: number[];
  upper: number[];
  firstSignal: number | null;
}

export function ewmaChart(x: ArrayLike<number>, mu0: number, sigma: number, design: EwmaDesign = DRIFT_EWMA): EwmaChart {
  const { lambda, L, clip } = design;
  if (clip !== undefined && !(clip > 0)) throw new RangeError(`EWMA: clip = ${clip} must be positive`);
  const c = clip === undefined ? Infinity : clip * sigma;
  if (!(lambda > 0 && lambda <= 1)) throw new RangeError(`EWMA: λ = ${lambda} must be in (0, 1]`);
  if (!(L > 0)) throw new RangeError(`EWMA: L = ${L} must be positive`);
  if (!(sigma > 0) || !Number.isFinite(sigma)) throw new RangeError(`EWMA: σ = ${sigma} must be a positive finite number`);
  const n = x.length;
  const ewma: number[] = new Array(n);
  const halfWidth: number[] = new Array(n);
  const lower: number[] = new Array(n);
  const upper: number[] = new Array(n);
  let z = mu0;
  let decay = 1;
  let first: number | null = null;
  const f = lambda / (2 - lambda);
  for (let i = 0; i < n; i++) {
    const e = x[i]! - z;
    z += lambda * (e > c ? c : e < -c ? -c : e);
    decay *= (1 - lambda) ** 2;
    const h = L * sigma * Math.sqrt(f * (1 - decay));
    ewma[i] = z;
    halfWidth[i] = h;
    lower[i] = mu0 - h;
    upper[i] = mu0 + h;
    if (first === null && (z > mu0 + h || z < mu0 - h)) first = i;
  }
  return { ewma, halfWidth, lower, upper, firstSignal: first };
}
