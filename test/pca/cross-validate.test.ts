import { EigenvalueDecomposition, Matrix, solve } from 'ml-matrix';
import { describe, expect, it } from 'vitest';
import { crossValidatePca } from '../../core/pca/index.ts';
import { lowRankData } from './synthetic.ts';

/**
 * Brute force of Bro et al. (2008) ekf for one fold: for each held-out row and each left-out
 * variable, solve the least-squares score estimate from the other variables explicitly (ml-matrix),
 * with loadings from an independent eigendecomposition of the training covariance (ml-matrix EVD).
 */
function bruteForcePress(X: { rows: number; cols: number; data: Float64Array }, A: number, k: number): number[] {
  const { rows: n, cols: p } = X;
  const press = new Array<number>(A).fill(0);
  for (let f = 0; f < k; f++) {
    const train: number[][] = [];
    const test: number[][] = [];
    for (let i = 0; i < n; i++) (i % k === f ? test : train).push(Array.from(X.data.subarray(i * p, (i + 1) * p)));
    const mean = new Array<number>(p).fill(0);
    for (const r of train) r.forEach((v, j) => (mean[j] += v / train.length));
    const Xc = new Matrix(train.map((r) => r.map((v, j) => v - mean[j]!)));
    const C = Xc.transpose().mmul(Xc);
    const evd = new EigenvalueDecomposition(C, { assumeSymmetric: true });
    const order = evd.realEigenvalues.map((_, i) => i).sort((a, b) => evd.realEigenvalues[b]! - evd.realEigenvalues[a]!);
    for (let a = 1; a <= A; a++) {
      const P = new Matrix(p, a);
      for (let c = 0; c < a; c++) for (let j = 0; j < p; j++) P.set(j, c, evd.eigenvectorMatrix.get(j, order[c]!));
      for (const r of test) {
        const x = r.map((v, j) => v - mean[j]!);
        for (let j = 0; j < p; j++) {
          const keep = [...Array(p).keys()].filter((v) => v !== j);
          const Pm = new Matrix(keep.map((v) => P.getRow(v)));
          const xm = Matrix.columnVector(keep.map((v) => x[v]!));
          const t = solve(Pm.transpose().mmul(Pm), Pm.transpose().mmul(xm));
          const xhat = Matrix.rowVector(P.getRow(j)).mmul(t).get(0, 0);
          press[a - 1] += (x[j]! - xhat) ** 2;
        }
      }
    }
  }
  return press;
}

describe('crossValidatePca (ekf, Bro et al. 2008)', () => {
  it('closed form equals the explicit leave-one-variable-out least squares', () => {
    const { X } = lowRankData(30, 12, [4, 2.5, 1.5], 0.3, 5);
    const cv = crossValidatePca(X, 4, { folds: 5 });
    const ref = bruteForcePress(X, 4, 5);
    cv.press.forEach((v, i) => expect(Math.abs(v / ref[i]! - 1)).toBeLessThan(1e-9));
    expect(cv.method).toMatch(/Bro, Kjeldahl, Smilde & Kiers 2008/);
  });
  it('closed form equals the explicit least squares on wide data (p > training rows: refit per fold)', () => {
    const { X } = lowRankData(20, 30, [4, 2.5, 1.5], 0.3, 8);
    const cv = crossValidatePca(X, 3, { folds: 4 });
    const ref = bruteForcePress(X, 3, 4);
    cv.press.forEach((v, i) => expect(Math.abs(v / ref[i]! - 1)).toBeLessThan(1e-9));
  });
  it('recommends the true rank of low-rank data with noise', () => {
    const { X } = lowRankData(200, 50, [6, 4, 3, 2], 0.3, 21);
    const cv = crossValidatePca(X, 8);
    expect(cv.recommended).toBe(4);
    expect(cv.press[3]!).toBeLessThan(cv.press[2]!);
    expect(cv.press0).toBeGreaterThan(cv.press[0]!);
  });
  it('names bad arguments', () => {
    const { X } = lowRankData(20, 10, [3], 0.3, 2);
    expect(() => crossValidatePca(X, 0)).toThrow(/maxComponents = 0/);
    expect(() => crossValidatePca(X, 3, { folds: 1 })).toThrow(/folds = 1/);
  });
});
