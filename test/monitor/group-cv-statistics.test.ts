import { describe, expect, it } from 'vitest';
import { denseMatrix } from '../../core/linalg/dense-matrix.ts';
import { fitPca, scoreRows } from '../../core/pca/fit-pca.ts';
import { crossValidatedStatistics } from '../../core/model/group-cv-statistics.ts';
import { createPrng } from '../../core/stats/prng.ts';

// Reference: a PCA refitted from scratch on the training rows of each left-out batch group
// (A2's fitPca, itself checked against numpy.linalg.svd in test/pca). The downdated form must agree
// to round-off.
function refit(X: ReturnType<typeof denseMatrix>, batchOfRow: number[], I: number, A: number) {
  const G = Math.min(I, 5);
  const p = X.cols;
  const t2 = new Float64Array(X.rows);
  const q = new Float64Array(X.rows);
  for (let g = 0; g < G; g++) {
    const train: number[] = [];
    const test: number[] = [];
    for (let i = 0; i < X.rows; i++) (batchOfRow[i]! % G === g ? test : train).push(i);
    const sub = (idx: number[]) => {
      const d = new Float64Array(idx.length * p);
      idx.forEach((i, r) => d.set(X.data.subarray(i * p, (i + 1) * p), r * p));
      return denseMatrix(idx.length, p, d);
    };
    const m = fitPca(sub(train), { components: Math.min(A, train.length - 1), center: true, seed: 1 });
    const s = scoreRows(m, sub(test));
    test.forEach((i, r) => { t2[i] = s.t2[r]!; q[i] = s.q[r]!; });
  }
  return { t2, q };
}

function data(I: number, perBatch: number, p: number, seed: number) {
  const prng = createPrng(seed);
  const rnd = () => prng.next();
  const n = I * perBatch;
  const X = denseMatrix(n, p);
  const batchOfRow: number[] = [];
  // three latent directions plus noise, a per-batch offset, so the groups differ
  const L = Array.from({ length: 3 }, () => Float64Array.from({ length: p }, () => rnd() - 0.5));
  for (let b = 0; b < I; b++) {
    const off = rnd() * 0.3;
    for (let k = 0; k < perBatch; k++) {
      const i = b * perBatch + k;
      batchOfRow.push(b);
      const z = [Math.sin(k / 7) * 3, rnd() * 2 - 1, off + rnd() * 0.5];
      for (let j = 0; j < p; j++) X.data[i * p + j] = 5 + z[0]! * L[0]![j]! + z[1]! * L[1]![j]! + z[2]! * L[2]![j]! + 0.05 * (rnd() - 0.5);
    }
  }
  return { X, batchOfRow };
}

describe('cross-validated T² and Q by left-out batch groups (downdated scatter)', () => {
  for (const [I, per, p, A] of [[12, 40, 30, 3], [3, 6, 40, 2], [7, 25, 180, 4]] as const) {
    it(`agrees with a refit per group: ${I} batches × ${per} spectra, ${p} variables, ${A} PCs`, () => {
      const { X, batchOfRow } = data(I, per, p, 11 + I);
      const got = crossValidatedStatistics(X, batchOfRow, I, A);
      const ref = refit(X, batchOfRow, I, A);
      for (let i = 0; i < X.rows; i++) {
        expect(Math.abs(got.t2[i]! - ref.t2[i]!)).toBeLessThanOrEqual(1e-7 * (1 + ref.t2[i]!));
        expect(Math.abs(got.q[i]! - ref.q[i]!)).toBeLessThanOrEqual(1e-7 * (1 + ref.q[i]!));
      }
    });
  }
});
