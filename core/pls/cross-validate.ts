/**
 * Cross-validation of PLS1 over 1…maxComponents: each segment is left out in turn, the model is
 * refitted (centring included) on the rest and the left-out samples are predicted with every
 * component count. RMSECV_a = √(Σ_i (ŷ_i,a − y_i)² / n).
 *
 * Recommended count: the one-standard-error rule (Hastie, Tibshirani & Friedman 2009, The
 * Elements of Statistical Learning, §7.10): the fewest components whose mean squared CV error is
 * within one standard error of the smallest one; the standard error is sd(e²_i)/√n at the minimum.
 *
 * Segments: 'loo' (leave one out), or k contiguous blocks (default; samples close in time stay
 * together, so neighbouring spectra of one batch do not predict each other) or k interleaved
 * ones (sample i in segment i mod k), or 'groups': one segment per distinct value of
 * `groups` (e.g. the batch of each spectrum: leave one batch out).
 */
import { denseMatrix, type DenseMatrix } from '../linalg/dense-matrix.ts';
import { checkPlsInput, coefficientsFor, nipalsPls1, rotationsFor } from './nipals.ts';

export interface CrossValidatePls1Options {
  maxComponents: number;
  folds: number | 'loo' | 'groups';
  segments?: 'contiguous' | 'interleaved';
  /** With folds 'groups': a group label per sample (e.g. batch index); each group is left out once. */
  groups?: ArrayLike<number>;
  center?: boolean;
}

export interface Pls1CrossValidation {
  /** rmsecv[a − 1] for a components. */
  rmsecv: number[];
  /** RMSECV of the intercept-only model (predicting the training mean). */
  rmsecv0: number;
  recommended: number;
  /** Cross-validated predictions: predictions[a − 1][i]. */
  predictions: number[][];
  folds: number;
  method: string;
}

function segmentOf(n: number, k: number, mode: 'contiguous' | 'interleaved'): Int32Array {
  const seg = new Int32Array(n);
  for (let i = 0; i < n; i++) seg[i] = mode === 'interleaved' ? i % k : Math.floor((i * k) / n);
  return seg;
}

export function crossValidatePls1(X: DenseMatrix, y: ArrayLike<number>, opts: CrossValidatePls1Options): Pls1CrossValidation {
  const { rows: n, cols: p } = X;
  const center = opts.center ?? true;
  const mode = opts.segments ?? 'contiguous';
  let k: number;
  let seg: Int32Array;
  if (opts.folds === 'groups') {
    const g = opts.groups;
    if (!g || g.length !== n) throw new RangeError(`crossValidatePls1: folds 'groups' needs a group label for each of the ${n} samples; got ${g ? g.length : 'none'}`);
    const ids = new Map<number, number>();
    seg = new Int32Array(n);
    for (let i = 0; i < n; i++) {
      if (!ids.has(g[i]!)) ids.set(g[i]!, ids.size);
      seg[i] = ids.get(g[i]!)!;
    }
    k = ids.size;
    if (k < 2) throw new RangeError('crossValidatePls1: folds \'groups\' needs at least 2 distinct groups');
  } else {
    k = opts.folds === 'loo' ? n : opts.folds;
    if (!Number.isInteger(k) || k < 2 || k > n) throw new RangeError(`crossValidatePls1: folds must be 'loo', 'groups' or an integer in [2, ${n}]; got ${opts.folds}`);
    seg = segmentOf(n, k, mode);
  }
  const Amax = opts.maxComponents;
  // The smallest training set must support Amax components.
  const sizes = new Int32Array(k);
  for (let i = 0; i < n; i++) sizes[seg[i]!]!++;
  const minTrain = n - Math.max(...sizes);
  checkPlsInput(denseMatrix(minTrain, p, new Float64Array(minTrain * p)), new Float64Array(minTrain), Amax, center, 'crossValidatePls1 (smallest training set)');
  checkPlsInput(X, y, 1, center, "crossValidatePls1");
  const pred = Array.from({ length: Amax }, () => new Array<number>(n).fill(0));
  const pred0 = new Array<number>(n).fill(0);
  for (let s = 0; s < k; s++) {
    const train: number[] = [];
    const test: number[] = [];
    for (let i = 0; i < n; i++) (seg[i] === s ? test : train).push(i);
    const Xt = denseMatrix(train.length, p);
    const yt = new Float64Array(train.length);
    train.forEach((i, r) => {
      Xt.data.set(X.data.subarray(i * p, (i + 1) * p), r * p);
      yt[r] = y[i]!;
    });
    const fit = nipalsPls1(Xt, yt, Amax, center);
    for (let a = 1; a <= Amax; a++) {
      const R = rotationsFor(fit.W, fit.P, p, Amax, a);
      const b = coefficientsFor(R, fit.q, p, a);
      for (const i of test) {
        let yh = fit.yMean;
        for (let j = 0; j < p; j++) yh += (X.data[i * p + j]! - fit.xMean[j]!) * b[j]!;
        pred[a - 1]![i] = yh;
      }
    }
    for (const i of test) pred0[i] = fit.yMean;
  }
  const sq = pred.map((row) => row.map((v, i) => (v - y[i]!) ** 2));
  const mse = sq.map((row) => row.reduce((acc, v) => acc + v, 0) / n);
  const rmsecv = mse.map(Math.sqrt);
  const rmsecv0 = Math.sqrt(pred0.reduce((acc, v, i) => acc + (v - y[i]!) ** 2, 0) / n);
  let best = 0;
  for (let a = 1; a < Amax; a++) if (mse[a]! < mse[best]!) best = a;
  const e2 = sq[best]!;
  const m = mse[best]!;
  const sd = Math.sqrt(e2.reduce((acc, v) => acc + (v - m) ** 2, 0) / Math.max(n - 1, 1));
  const threshold = m + sd / Math.sqrt(n);
  let recommended = best + 1;
  for (let a = 0; a <= best; a++) {
    if (mse[a]! <= threshold) {
      recommended = a + 1;
      break;
    }
  }
  return {
    rmsecv,
    rmsecv0,
    recommended,
    predictions: pred,
    folds: k,
    method: opts.folds === 'loo' ? 'leave-one-out' : opts.folds === 'groups' ? `leave-one-group-out (${k} groups)` : `${k}-fold ${mode}`,
  };
}
