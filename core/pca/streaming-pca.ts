/**
 * PCA of more spectra than fit in memory: the spectra stream past once, and only p-sized state is
 * kept — per group of batches, the count, the sum and the scatter Σ (x − c)(x − c)ᵀ about a fixed
 * provisional centre c (the first spectrum seen; shifting by c keeps the later subtraction of the
 * mean from cancelling digits). Memory is groups × p² doubles whatever the number of spectra: no
 * n × p matrix is formed.
 *
 * - Accumulators of disjoint parts of the data (worker threads) merge by adding (same centre).
 * - The centred covariance C = (S_c − n (m − c)(m − c)ᵀ) / (n − 1) gives the model as fitPca does
 *   for n ≥ p: top eigenpairs by Lanczos (sym-eigen.ts), θ1..θ3 of the residual covariance
 *   (residual-theta.ts), signs fixed the same way.
 * - Cross-validation by groups (leave one group of batches out, as a plant history is split): the
 *   model without group g comes from the total minus group g's state; its PRESS is the squared
 *   residual of group g's spectra under that model for 1…maxA components — a second pass over the
 *   data (row-wise PRESS, not the ekf variant of the in-memory build; Wold 1978's row-wise
 *   cross-validation, from memory).
 * Rows are taken in panels of PANEL_ROWS through the blocked kernel of gram-kernel.ts.
 */
import { accumulateRowGram, PANEL_ROWS, roundUp4, symmetrizeUpper } from './gram-kernel.ts';
import { topSymmetricEigen } from './sym-eigen.ts';
import { residualTheta } from './residual-theta.ts';
import { fixSigns, type PcaCore } from './fit-pca.ts';

/** The transferable state of one group: count, Σ(x − c), and the upper triangle of Σ(x − c)(x − c)ᵀ (padded pp × pp). */
export interface ScatterState {
  p: number;
  n: number;
  centre: Float64Array;
  sum: Float64Array;
  /** pp × pp, pp = p rounded up to 4; upper triangle (and 4 × 4 diagonal tiles) written. */
  upper: Float64Array;
}

export class ScatterAccumulator {
  readonly p: number;
  readonly pp: number;
  n = 0;
  readonly sum: Float64Array;
  readonly upper: Float64Array;
  private readonly panel: Float64Array;
  private rows = 0;
  centre: Float64Array | null;

  constructor(p: number, centre: Float64Array | null = null) {
    if (!Number.isInteger(p) || p < 1) throw new RangeError(`streaming PCA: ${p} variables`);
    this.p = p;
    this.pp = roundUp4(p);
    this.sum = new Float64Array(p);
    this.upper = new Float64Array(this.pp * this.pp);
    this.panel = new Float64Array(this.pp * PANEL_ROWS);
    this.centre = centre;
    if (centre && centre.length !== p) throw new RangeError(`streaming PCA: centre has ${centre.length} values, not ${p}`);
  }

  /** Add one spectrum (length p, finite). Copies it into the current panel; nothing is kept. */
  add(x: ArrayLike<number>): void {
    const { p, panel } = this;
    if (x.length !== p) throw new RangeError(`streaming PCA: spectrum has ${x.length} values, the others ${p}`);
    for (let j = 0; j < p; j++) {
      const v = x[j]!;
      if (v - v !== 0) throw new RangeError(`streaming PCA: value ${j} of spectrum ${this.n} is ${v}; spectra must hold finite numbers`);
    }
    if (!this.centre) this.centre = Float64Array.from(x);
    const c = this.centre;
    const r = this.rows;
    const B = PANEL_ROWS;
    for (let j = 0; j < p; j++) {
      const d = x[j]! - c[j]!;
      panel[j * B + r] = d;
      this.sum[j] += d;
    }
    this.n++;
    if (++this.rows === B) this.flush();
  }

  /** Fold the pending panel into the scatter (called by add, and before the state is read). */
  flush(): void {
    if (this.rows === 0) return;
    const B = PANEL_ROWS;
    if (this.rows < B) for (let j = 0; j < this.p; j++) for (let r = this.rows; r < B; r++) this.panel[j * B + r] = 0;
    accumulateRowGram(this.panel, this.pp, B, this.upper, this.pp);
    this.rows = 0;
  }

  state(): ScatterState {
    this.flush();
    return { p: this.p, n: this.n, centre: this.centre ?? new Float64Array(this.p), sum: this.sum, upper: this.upper };
  }
}

/** Add state b into a (same p and centre). */
export function mergeScatter(a: ScatterState, b: ScatterState): ScatterState {
  if (a.p !== b.p) throw new RangeError(`streaming PCA: merging ${a.p} and ${b.p} variables`);
  if (b.n === 0) return a;
  if (a.n === 0) return { ...b, sum: Float64Array.from(b.sum), upper: Float64Array.from(b.upper), centre: Float64Array.from(b.centre) };
  for (let j = 0; j < a.p; j++) if (a.centre[j] !== b.centre[j]) throw new RangeError('streaming PCA: parts accumulated about different centres cannot be merged');
  const upper = Float64Array.from(a.upper);
  for (let i = 0; i < upper.length; i++) upper[i] += b.upper[i]!;
  const sum = Float64Array.from(a.sum);
  for (let j = 0; j < a.p; j++) sum[j] += b.sum[j]!;
  return { p: a.p, n: a.n + b.n, centre: a.centre, sum, upper };
}

/** a − b (the data of a without the part b), for leave-group-out models. */
export function subtractScatter(a: ScatterState, b: ScatterState): ScatterState {
  const upper = Float64Array.from(a.upper);
  for (let i = 0; i < upper.length; i++) upper[i] -= b.upper[i]!;
  const sum = Float64Array.from(a.sum);
  for (let j = 0; j < a.p; j++) sum[j] -= b.sum[j]!;
  return { p: a.p, n: a.n - b.n, centre: a.centre, sum, upper };
}

/** Mean and centred covariance (n − 1 denominator), p × p full. */
export function covarianceOf(s: ScatterState): { mean: Float64Array; cov: Float64Array } {
  const { p, n } = s;
  if (n < 2) throw new RangeError(`streaming PCA: needs at least 2 spectra (got ${n})`);
  const pp = roundUp4(p);
  const C = symmetrizeUpper(s.upper, pp, p);
  const d = Float64Array.from(s.sum, (v) => v / n); // m − c
  for (let i = 0; i < p; i++) {
    const di = d[i]! * n;
    for (let j = 0; j < p; j++) C[i * p + j] = (C[i * p + j]! - di * d[j]!) / (n - 1);
  }
  const mean = Float64Array.from(d, (v, j) => v + s.centre[j]!);
  return { mean, cov: C };
}

/** The PCA of the streamed data: as fitPca (centred, n ≥ p) gives it, without calibration T²/Q. */
export function pcaFromScatter(s: ScatterState, A: number, seed = 1, withTheta = true): PcaCore {
  const { p } = s;
  if (s.n < 2) throw new RangeError(`streaming PCA: needs at least 2 spectra (got ${s.n})`);
  if (!Number.isInteger(A) || A < 1 || A > Math.min(p, s.n - 1)) throw new RangeError(`streaming PCA: components = ${A} must be from 1 to ${Math.min(p, s.n - 1)}`);
  const { mean, cov } = covarianceOf(s);
  let total = 0;
  for (let j = 0; j < p; j++) total += cov[j * p + j]!;
  const eig = topSymmetricEigen(cov, p, A, seed);
  for (let a = 0; a < A; a++) if (!(eig.values[a]! > 0)) throw new RangeError(`PCA: component ${a + 1} has variance ${eig.values[a]}; the data have rank below ${A} — ask for fewer components`);
  const theta: [number, number, number] = withTheta ? residualTheta(cov, p, eig.values, eig.vectors, A) : [0, 0, 0];
  fixSigns(eig.vectors, p, A);
  return { mean, loadings: eig.vectors, eigenvalues: eig.values, totalVariance: total, theta };
}

/**
 * Leave-one-group-out PRESS: the models without each group (from `groups`, the per-group states,
 * and `total`, their merge), for 1…maxA components; `press(g, models)` streams group g's spectra
 * through `residualPress`. Returns the fold models for the caller's second pass.
 */
export function foldModels(groups: ScatterState[], total: ScatterState, maxA: number, seed = 1): PcaCore[] {
  return groups.map((g) => pcaFromScatter(subtractScatter(total, g), maxA, seed, false));
}

/**
 * Add to press[a − 1] (a = 1…A of `m`) the squared residual of x under the first a components of m.
 * `work` has length p. Allocates nothing.
 */
export function residualPress(m: PcaCore, x: ArrayLike<number>, press: Float64Array, work: Float64Array): void {
  const p = m.mean.length;
  const A = m.eigenvalues.length;
  let ss = 0;
  for (let j = 0; j < p; j++) {
    const e = x[j]! - m.mean[j]!;
    work[j] = e;
    ss += e * e;
  }
  // ‖x − Σ_{b≤a} t_b v_b‖² = ‖e‖² − Σ_{b≤a} t_b² (orthonormal loadings)
  for (let a = 0; a < A; a++) {
    let t = 0;
    for (let j = 0; j < p; j++) t += work[j]! * m.loadings[j * A + a]!;
    ss -= t * t;
    press[a] += Math.max(ss, 0);
  }
}
