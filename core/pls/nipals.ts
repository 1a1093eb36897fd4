/**
 * PLS1 by NIPALS (Wold et al. 1984; for one response the algorithm needs no inner iteration):
 * for a = 1…A: w = Xᵀy/‖Xᵀy‖, t = Xw, p = Xᵀt/tᵀt, q = yᵀt/tᵀt, X ← X − tpᵀ, y ← y − qt.
 * With R = W(PᵀW)⁻¹ the scores of any (centred) x are Rᵀx and the regression vector for a
 * components is R_a q_a (Helland 1988; de Jong 1993).
 */
import type { DenseMatrix } from '../linalg/dense-matrix.ts';

export interface NipalsPls1 {
  n: number;
  p: number;
  A: number;
  xMean: Float64Array;
  yMean: number;
  /** p × A row-major */
  W: Float64Array;
  /** p × A row-major */
  P: Float64Array;
  q: Float64Array;
  /** n × A row-major */
  T: Float64Array;
  /** n × p, the X residual after A components */
  E: Float64Array;
}

export function checkPlsInput(X: DenseMatrix, y: ArrayLike<number>, A: number, center: boolean, what: string): void {
  const { rows: n, cols: p } = X;
  if (y.length !== n) throw new RangeError(`${what}: y has ${y.length} values; X has ${n} rows`);
  if (n < 2) throw new RangeError(`${what}: needs at least 2 calibration samples; got ${n}`);
  if (!Number.isInteger(A) || A < 1) throw new RangeError(`${what}: components must be a positive integer; got ${A}`);
  const maxA = Math.min(center ? n - 1 : n, p);
  if (A > maxA) throw new RangeError(`${what}: ${A} components asked; at most ${maxA} for ${n} samples × ${p} variables${center ? ' (centred)' : ''}`);
  for (let i = 0; i < X.data.length; i++) {
    if (!Number.isFinite(X.data[i]!)) throw new RangeError(`${what}: X[${Math.floor(i / p)}][${i % p}] is not a finite number`);
  }
  for (let i = 0; i < n; i++) if (!Number.isFinite(y[i]!)) throw new RangeError(`${what}: y[${i}] is not a finite number`);
}

export function nipalsPls1(X: DenseMatrix, y: ArrayLike<number>, A: number, center: boolean): NipalsPls1 {
  const { rows: n, cols: p } = X;
  const xMean = new Float64Array(p);
  let yMean = 0;
  if (center) {
    for (let i = 0; i < n; i++) for (let j = 0; j < p; j++) xMean[j]! += X.data[i * p + j]!;
    for (let j = 0; j < p; j++) xMean[j]! /= n;
    for (let i = 0; i < n; i++) yMean += y[i]!;
    yMean /= n;
  }
  const E = new Float64Array(n * p);
  for (let i = 0; i < n; i++) for (let j = 0; j < p; j++) E[i * p + j] = X.data[i * p + j]! - xMean[j]!;
  const f = new Float64Array(n);
  for (let i = 0; i < n; i++) f[i] = y[i]! - yMean;
  const W = new Float64Array(p * A);
  const P = new Float64Array(p * A);
  const q = new Float64Array(A);
  const T = new Float64Array(n * A);
  const w = new Float64Array(p);
  const t = new Float64Array(n);
  const pl = new Float64Array(p);
  let firstNorm = 0;
  for (let a = 0; a < A; a++) {
    w.fill(0);
    for (let i = 0; i < n; i++) {
      const fi = f[i]!;
      const o = i * p;
      for (let j = 0; j < p; j++) w[j]! += E[o + j]! * fi;
    }
    let wn = 0;
    for (let j = 0; j < p; j++) wn += w[j]! * w[j]!;
    wn = Math.sqrt(wn);
    if (a === 0) firstNorm = wn;
    if (!(wn > 1e-12 * firstNorm) || wn === 0) {
      throw new RangeError(`PLS1: after ${a} component(s) X carries no further covariance with y; use at most ${a} component(s)`);
    }
    for (let j = 0; j < p; j++) w[j]! /= wn;
    let tt = 0;
    for (let i = 0; i < n; i++) {
      const o = i * p;
      let s = 0;
      for (let j = 0; j < p; j++) s += E[o + j]! * w[j]!;
      t[i] = s;
      tt += s * s;
    }
    pl.fill(0);
    let qa = 0;
    for (let i = 0; i < n; i++) {
      const ti = t[i]!;
      const o = i * p;
      for (let j = 0; j < p; j++) pl[j]! += E[o + j]! * ti;
      qa += f[i]! * ti;
    }
    for (let j = 0; j < p; j++) pl[j]! /= tt;
    qa /= tt;
    for (let i = 0; i < n; i++) {
      const ti = t[i]!;
      const o = i * p;
      for (let j = 0; j < p; j++) E[o + j]! -= ti * pl[j]!;
      f[i]! -= qa * ti;
      T[i * A + a] = ti;
    }
    for (let j = 0; j < p; j++) {
      W[j * A + a] = w[j]!;
      P[j * A + a] = pl[j]!;
    }
    q[a] = qa;
  }
  return { n, p, A, xMean, yMean, W, P, q, T, E };
}

/** R_a = W_a (P_aᵀ W_a)⁻¹ (p × a, row-major) for the first a components of a fit with A. */
export function rotationsFor(W: Float64Array, P: Float64Array, p: number, A: number, a: number): Float64Array {
  // M = P_aᵀ W_a (a × a); invert by Gauss–Jordan with partial pivoting.
  const M = new Float64Array(a * 2 * a);
  const w2 = 2 * a;
  for (let r = 0; r < a; r++) {
    for (let c = 0; c < a; c++) {
      let s = 0;
      for (let j = 0; j < p; j++) s += P[j * A + r]! * W[j * A + c]!;
      M[r * w2 + c] = s;
    }
    M[r * w2 + a + r] = 1;
  }
  for (let c = 0; c < a; c++) {
    let piv = c;
    for (let r = c + 1; r < a; r++) if (Math.abs(M[r * w2 + c]!) > Math.abs(M[piv * w2 + c]!)) piv = r;
    if (piv !== c) {
      for (let k = 0; k < w2; k++) {
        const tmp = M[c * w2 + k]!;
        M[c * w2 + k] = M[piv * w2 + k]!;
        M[piv * w2 + k] = tmp;
      }
    }
    const d = M[c * w2 + c]!;
    for (let k = 0; k < w2; k++) M[c * w2 + k]! /= d;
    for (let r = 0; r < a; r++) {
      if (r === c) continue;
      const fct = M[r * w2 + c]!;
      if (fct === 0) continue;
      for (let k = 0; k < w2; k++) M[r * w2 + k]! -= fct * M[c * w2 + k]!;
    }
  }
  const R = new Float64Array(p * a);
  for (let j = 0; j < p; j++) {
    for (let c = 0; c < a; c++) {
      let s = 0;
      for (let k = 0; k < a; k++) s += W[j * A + k]! * M[k * w2 + a + c]!;
      R[j * a + c] = s;
    }
  }
  return R;
}

/** b_a = R_a q_a (length p). */
export function coefficientsFor(R: Float64Array, q: Float64Array, p: number, a: number): Float64Array {
  const b = new Float64Array(p);
  for (let j = 0; j < p; j++) {
    let s = 0;
    for (let k = 0; k < a; k++) s += R[j * a + k]! * q[k]!;
    b[j] = s;
  }
  return b;
}
