/**
 * EWMA control chart (Roberts 1959; design by Lucas & Saccucci 1990; NIST/SEMATECH e-Handbook of
 * Statistical Methods, section 6.3.2.4): z_i = λ·x_i + (1 − λ)·z_{i−1}, z_0 = μ0, with the exact
 * limits μ0 ± L·σ·√(λ/(2 − λ)·(1 − (1 − λ)^{2i})) (they widen to the asymptotic ones).
 */

export interface EwmaDesign {
  /** Weight of the newest value, 0 < λ ≤ 1. */
  lambda: number;
  /** Width of the limits in σ of the EWMA. */
  L: number;
}

/**
 * Tideline's design for the batch-level drift chart: λ = 0.2, L = 3. Lucas & Saccucci (1990) tabulate
 * an in-control average run length of about 560 for this pair and quick detection of shifts of one
 * standard deviation (ARL about 10) — values from memory of their Table 3; the Monte Carlo in the
 * tests checks the in-control rate.
 */
export const DRIFT_EWMA: EwmaDesign = { lambda: 0.2, L: 3 };

export interface EwmaChart {
  ewma: number[];
  /** Half-width of the limits at each point (σ units of x times L times the EWMA factor). */
  halfWidth: number[];
  lower: number[];
  upper: number[];
  firstSignal: number | null;
}

export function ewmaChart(x: ArrayLike<number>, mu0: number, sigma: number, design: EwmaDesign = DRIFT_EWMA): EwmaChart {
  const { lambda, L } = design;
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
    z = lambda * x[i]! + (1 - lambda) * z;
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
