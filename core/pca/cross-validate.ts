/**
 * Cross-validation of the number of PCA components by the element-wise k-fold scheme ("ekf") of
 * Bro, Kjeldahl, Smilde & Kiers (2008, Anal. Bioanal. Chem. 390:1241): rows are split into k folds
 * (venetian blinds: row i goes to fold i mod k); the model is fitted without the fold; then in each
 * held-out row every variable j is left out in turn, the scores are estimated by least squares from
 * the other variables, and x_j is predicted from them. With orthonormal loadings P this estimate has
 * the closed form  x_j − x̂_j = e_j / (1 − Σ_{b≤a} P_jb²),  e_j the ordinary residual with a
 * components (Sherman–Morrison on (PᵀP − p_jp_jᵀ)⁻¹), so no element is predicted from itself.
 * PRESS(a) = Σ over held-out elements of (x_j − x̂_j)². Recommended count: the a of least PRESS.
 */
import type { DenseMatrix } from '../linalg/dense-matrix.ts';
import { checkMatrix, columnMeans, fitPcaCore } from './fit-pca.ts';
import { scatterMatrix } from './gram-kernel.ts';
import { topSymmetricEigen } from './sym-eigen.ts';

export interface PcaCrossValidation {
  /** press[a − 1] for a = 1..maxComponents. */
  press: number[];
  /** Σ of squared held-out elements about the training mean (no component). */
  press0: number;
  /** 1-based component count with the least PRESS. */
  recommended: number;
  method: string;
  folds: number;
  /** foldPress[a − 1][f]: the part of press[a − 1] from the rows of fold f. */
  foldPress: number[][];
  /** Rows in each fold. */
  foldRows: number[];
}

export function crossValidatePca(
  X: DenseMatrix,
  maxComponents: number,
  opts: { folds?: number; center?: boolean; seed?: number } = {},
): PcaCrossValidation {
  checkMatrix(X, 'PCA cross-validation');
  const { rows: n, cols: p } = X;
  const center = opts.center ?? true;
  const k = opts.folds ?? Math.min(7, n);
  if (!Number.isInteger(k) || k < 2 || k > n) throw new RangeError(`PCA cross-validation: folds = ${k} must be an integer from 2 to n = ${n}`);
  const smallestTrain = n - Math.ceil(n / k);
  const maxA = Math.min(p - 1, smallestTrain - (center ? 1 : 0));
  if (!Number.isInteger(maxComponents) || maxComponents < 1 || maxComponents > maxA) {
    throw new RangeError(`PCA cross-validation: maxComponents = ${maxComponents} must be an integer from 1 to ${maxA} (${smallestTrain} training rows per fold, ${p} variables)`);
  }
  const A = maxComponents;
  const press = new Float64Array(A);
  const foldPress = Array.from({ length: A }, () => new Array<number>(k).fill(0));
  const foldRows = new Array<number>(k).fill(0);
  let press0 = 0;
  const xc = new Float64Array(p);
  const t = new Float64Array(A);
  // Tall data: the training scatter of each fold is the total scatter minus the fold's own, both
  // about the overall mean, corrected to the training mean:
  //   S_train = S_all − S_fold − n_t·d·dᵀ,  d = m_train − m_all
  // so the folds cost two Gram passes in all instead of one per fold.
  const tall = p <= smallestTrain;
  const overallMean = center ? columnMeans(X) : new Float64Array(p);
  const sAll = tall ? scatterMatrix(X.data, n, p, overallMean) : null;
  for (let f = 0; f < k; f++) {
    const train: number[] = [];
    const test: number[] = [];
    for (let i = 0; i < n; i++) (i % k === f ? test : train).push(i);
    let P: Float64Array;
    let mean: Float64Array;
    if (sAll) {
      const sFold = scatterMatrix(X.data, n, p, overallMean, test);
      const nt = train.length;
      mean = new Float64Array(p);
      if (center) {
        const foldMean = columnMeans(X, test);
        for (let j = 0; j < p; j++) mean[j] = (n * overallMean[j]! - test.length * foldMean[j]!) / nt;
      }
      const d = Float64Array.from(mean, (v, j) => v - overallMean[j]!);
      const C = new Float64Array(p * p);
      const dof = nt - 1;
      for (let i = 0; i < p; i++) {
        for (let j = 0; j < p; j++) C[i * p + j] = (sAll[i * p + j]! - sFold[i * p + j]! - nt * d[i]! * d[j]!) / dof;
      }
      P = topSymmetricEigen(C, p, A, opts.seed ?? 1).vectors;
    } else {
      const core = fitPcaCore(X, A, center, opts.seed ?? 1, train, false);
      P = core.loadings;
      mean = core.mean;
    }
    foldRows[f] = test.length;
    const before = Array.from(press);
    for (const i of test) {
      const off = i * p;
      for (let j = 0; j < p; j++) xc[j] = X.data[off + j]! - mean[j]!;
      for (let a = 0; a < A; a++) {
        let s = 0;
        for (let j = 0; j < p; j++) s += xc[j]! * P[j * A + a]!;
        t[a] = s;
      }
      for (let j = 0; j < p; j++) {
        let r = xc[j]!;
        let c = 0;
        press0 += r * r;
        for (let a = 0; a < A; a++) {
          const pj = P[j * A + a]!;
          r -= pj * t[a]!;
          c += pj * pj;
          const e = r / Math.max(1 - c, 1e-12);
          press[a] += e * e;
        }
      }
    }
    for (let a = 0; a < A; a++) foldPress[a]![f] = press[a]! - before[a]!;
  }
  let best = 0;
  for (let a = 1; a < A; a++) if (press[a]! < press[best]!) best = a;
  return {
    press: Array.from(press),
    press0,
    recommended: best + 1,
    method: `ekf: element-wise ${k}-fold, venetian blinds, each variable left out in turn (Bro, Kjeldahl, Smilde & Kiers 2008)`,
    folds: k,
    foldPress,
    foldRows,
  };
}
