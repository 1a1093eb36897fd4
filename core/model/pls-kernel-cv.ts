/**
 * Cross-validation of PLS1 by contiguous segments, computed from cross-product matrices: the same
 * segments, predictions, RMSECV and one-standard-error recommendation as core/pls's
 * crossValidatePls1 (folds k, 'contiguous'), but each fold's model comes from XᵀX and Xᵀy of its
 * training rows by the kernel algorithm of Dayal & MacGregor (1997, J. Chemometrics 11:73,
 * "improved PLS algorithms", PLS1 form), which gives the NIPALS regression coefficients in exact
 * arithmetic. The training cross-products are the totals minus the fold's own, about the overall
 * mean and corrected to the training mean, so the data are passed once in all instead of once per
 * fold and component (test/monitor checks it against crossValidatePls1). Folds are contiguous
 * segments or given per row (whole batches left out: core/model/property-model.ts).
 */
import type { DenseMatrix } from '../linalg/dense-matrix.ts';
import { scatterMatrix } from '../pca/gram-kernel.ts';
import { columnMeans } from '../pca/fit-pca.ts';

/** One fold's model for every count up to A (kept when asked): enough to project any spectrum. */
export interface KernelFoldModel {
  /** Training mean of X. */
  xMean: Float64Array;
  /** Training mean of y. */
  yMean: number;
  /** Training rows. */
  nTrain: number;
  /** Rotations r_a (A × p, row a): training scores t_a = r_aᵀ(x − x̄). */
  R: Float64Array;
  /** X loadings p_a (A × p, row a). */
  P: Float64Array;
  /** t_aᵀt_a over the training rows, per component. */
  tt: Float64Array;
  /** Regression vector for each count: b[(a − 1)·p + j]. */
  B: Float64Array;
}

export interface KernelCv {
  rmsecv: number[];
  /** One-standard-error choice on single samples (as crossValidatePls1; contiguous segments only). */
  recommended: number;
  /** predictions[a − 1][i]: row i predicted by the model of its fold with a components. */
  predictions: Float64Array[];
  /** Fold of each row and the number of folds. */
  segment: Int32Array;
  folds: number;
  foldModels?: KernelFoldModel[];
}

/**
 * folds: a number k of contiguous segments, or a fold label (0 … k − 1) per row, e.g. the batch of
 * each spectrum, so whole batches are left out. keepFolds: also return each fold's model.
 */
export function kernelCrossValidatePls1(X: DenseMatrix, y: ArrayLike<number>, maxComponents: number, folds: number | Int32Array, opts: { keepFolds?: boolean } = {}): KernelCv {
  const { rows: n, cols: p } = X;
  let k: number;
  let seg: Int32Array;
  if (typeof folds === 'number') {
    k = folds;
    if (!Number.isInteger(k) || k < 2 || k > n) throw new RangeError(`PLS cross-validation: folds must be an integer in [2, ${n}]; got ${folds}`);
    seg = new Int32Array(n);
    for (let i = 0; i < n; i++) seg[i] = Math.floor((i * k) / n);
  } else {
    if (folds.length !== n) throw new RangeError(`PLS cross-validation: ${folds.length} fold labels for ${n} rows`);
    seg = folds;
    k = 0;
    for (let i = 0; i < n; i++) {
      if (!(seg[i]! >= 0)) throw new RangeError(`PLS cross-validation: fold label ${seg[i]} of row ${i} is negative`);
      k = Math.max(k, seg[i]! + 1);
    }
    if (k < 2) throw new RangeError('PLS cross-validation: needs at least 2 folds');
  }
  const A = maxComponents;
  const m = columnMeans(X);
  const rowsOf: number[][] = Array.from({ length: k }, () => []);
  for (let i = 0; i < n; i++) rowsOf[seg[i]!]!.push(i);
  for (let f = 0; f < k; f++) if (rowsOf[f]!.length === 0) throw new RangeError(`PLS cross-validation: fold ${f + 1} has no rows`);
  const Sf: Float64Array[] = [];
  const uf: Float64Array[] = []; // Σ_fold (x − m)
  const cf: Float64Array[] = []; // Σ_fold (x − m)·y
  const yf: number[] = [];
  const S = new Float64Array(p * p);
  const cAll = new Float64Array(p);
  let yAll = 0;
  for (let f = 0; f < k; f++) {
    const s = scatterMatrix(X.data, n, p, m, rowsOf[f]!);
    const u = new Float64Array(p);
    const c = new Float64Array(p);
    let ys = 0;
    for (const i of rowsOf[f]!) {
      const yi = y[i]!;
      ys += yi;
      for (let j = 0; j < p; j++) {
        const v = X.data[i * p + j]! - m[j]!;
        u[j] += v;
        c[j] += v * yi;
      }
    }
    for (let q = 0; q < p * p; q++) S[q] += s[q]!;
    for (let j = 0; j < p; j++) cAll[j] += c[j]!;
    yAll += ys;
    Sf.push(s); uf.push(u); cf.push(c); yf.push(ys);
  }
  const pred = Array.from({ length: A }, () => new Float64Array(n));
  const foldModels: KernelFoldModel[] = [];
  const St = new Float64Array(p * p);
  const c = new Float64Array(p);
  const d = new Float64Array(p);
  const xMean = new Float64Array(p);
  const R = new Float64Array(A * p);
  const P = new Float64Array(A * p);
  const Sr = new Float64Array(p);
  const w = new Float64Array(p);
  const b = new Float64Array(p);
  const TT = new Float64Array(A);
  const BB = new Float64Array(opts.keepFolds ? A * p : 0);
  for (let f = 0; f < k; f++) {
    const test = rowsOf[f]!;
    const nt = n - test.length;
    if (nt < 2) throw new RangeError(`PLS cross-validation: only ${nt} training rows without fold ${f + 1}`);
    const ybar = (yAll - yf[f]!) / nt;
    for (let j = 0; j < p; j++) { d[j] = -uf[f]![j]! / nt; xMean[j] = m[j]! + d[j]!; }
    const s = Sf[f]!;
    for (let i = 0; i < p; i++) for (let j = 0; j < p; j++) St[i * p + j] = S[i * p + j]! - s[i * p + j]! - nt * d[i]! * d[j]!;
    // Σ_train (x − x̄_t)(y − ȳ_t) = Σ_train (x − m)·y − n_t·ȳ_t·d
    for (let j = 0; j < p; j++) c[j] = cAll[j]! - cf[f]![j]! - nt * ybar * d[j]!;
    b.fill(0);
    for (let a = 0; a < A; a++) {
      let nc = 0;
      for (let j = 0; j < p; j++) nc += c[j]! * c[j]!;
      nc = Math.sqrt(nc);
      for (let j = 0; j < p; j++) w[j] = c[j]! / nc;
      const r = R.subarray(a * p, (a + 1) * p);
      r.set(w);
      for (let h = 0; h < a; h++) {
        let pw = 0;
        for (let j = 0; j < p; j++) pw += P[h * p + j]! * w[j]!;
        for (let j = 0; j < p; j++) r[j] -= pw * R[h * p + j]!;
      }
      let tt = 0;
      for (let i = 0; i < p; i++) {
        let v = 0;
        for (let j = 0; j < p; j++) v += St[i * p + j]! * r[j]!;
        Sr[i] = v;
        tt += r[i]! * v;
      }
      let cr = 0;
      for (let j = 0; j < p; j++) cr += c[j]! * r[j]!;
      const qa = cr / tt;
      for (let j = 0; j < p; j++) { P[a * p + j] = Sr[j]! / tt; c[j] -= Sr[j]! * qa; b[j] += r[j]! * qa; }
      TT[a] = tt;
      if (opts.keepFolds) BB.set(b, a * p);
      for (const i of test) {
        let yh = ybar;
        for (let j = 0; j < p; j++) yh += (X.data[i * p + j]! - xMean[j]!) * b[j]!;
        pred[a]![i] = yh;
      }
    }
    if (opts.keepFolds) foldModels.push({ xMean: Float64Array.from(xMean), yMean: ybar, nTrain: nt, R: R.slice(), P: P.slice(), tt: TT.slice(), B: BB.slice() });
  }
  // RMSECV and the one-standard-error rule exactly as crossValidatePls1.
  const sq = pred.map((row) => Array.from(row, (v, i) => (v - y[i]!) ** 2));
  const mse = sq.map((row) => row.reduce((acc, v) => acc + v, 0) / n);
  const rmsecv = mse.map(Math.sqrt);
  let best = 0;
  for (let a = 1; a < A; a++) if (mse[a]! < mse[best]!) best = a;
  const e2 = sq[best]!;
  const mb = mse[best]!;
  const sd = Math.sqrt(e2.reduce((acc, v) => acc + (v - mb) ** 2, 0) / Math.max(n - 1, 1));
  const threshold = mb + sd / Math.sqrt(n);
  let recommended = best + 1;
  for (let a = 0; a <= best; a++) if (mse[a]! <= threshold) { recommended = a + 1; break; }
  return { rmsecv, recommended, predictions: pred, segment: seg, folds: k, ...(opts.keepFolds ? { foldModels } : {}) };
}
