/**
 * T² and Q of every reference spectrum from PCA models fitted without its batch group (the
 * per-progress-point limits need residuals of batches the model has not seen: in-sample residuals
 * understate those of new batches; leave-batches-out limits, van Sprang, Ramaker, Westerhuis,
 * Gurden & Smilde 2002, Chem. Eng. Sci. 57:3979 — from memory).
 *
 * Speed: instead of refitting a PCA from the rows of each training set (one p × p scatter pass over
 * all training rows per group), the cross-product Σ (x−c)(x−c)ᵀ and the column sums are
 * accumulated once per group about the overall mean c; the training covariance of group g is then
 * the total minus that group, corrected to the training mean: C = (S − S_g − n_t d dᵀ)/(n_t − 1),
 * d = m_train − c (the form of A2's crossValidatePca). The Gram work is one
 * pass over the data in all. Eigenpairs by the same Lanczos routine and sign convention as fitPca,
 * projection by the same projector, so the figures agree with a refit to round-off (test/model).
 */
import type { DenseMatrix } from '../linalg/dense-matrix.ts';
import { denseMatrix } from '../linalg/dense-matrix.ts';
import { scatterMatrix } from '../pca/gram-kernel.ts';
import { topSymmetricEigen } from '../pca/sym-eigen.ts';
import { columnMeans, fixSigns } from '../pca/fit-pca.ts';
import { createProjector } from '../pca/projector.ts';
import type { PcaModel } from '../pca/pca-model.ts';

/** Group of batch b: b mod G, G = min(I, 5). */
export function crossValidatedStatistics(X: DenseMatrix, batchOfRow: ArrayLike<number>, I: number, A: number): { t2: Float64Array; q: Float64Array } {
  const G = Math.min(I, 5);
  const n = X.rows;
  const p = X.cols;
  const t2 = new Float64Array(n);
  const q = new Float64Array(n);
  const rowsOf: number[][] = Array.from({ length: G }, () => []);
  for (let i = 0; i < n; i++) rowsOf[batchOfRow[i]! % G]!.push(i);
  // Scatter about the overall mean (not about zero), so uncentred data lose no digits.
  const centre = columnMeans(X);
  const S: Float64Array[] = [];
  const sums: Float64Array[] = [];
  const total = new Float64Array(p * p);
  for (let g = 0; g < G; g++) {
    const Sg = scatterMatrix(X.data, n, p, centre, rowsOf[g]!);
    const sg = new Float64Array(p);
    for (const i of rowsOf[g]!) for (let j = 0; j < p; j++) sg[j] += X.data[i * p + j]! - centre[j]!;
    for (let k = 0; k < p * p; k++) total[k] += Sg[k]!;
    S.push(Sg);
    sums.push(sg);
  }
  const C = new Float64Array(p * p);
  const mean = new Float64Array(p);
  const d = new Float64Array(p);
  for (let g = 0; g < G; g++) {
    const test = rowsOf[g]!;
    if (test.length === 0) continue;
    const nt = n - test.length;
    if (nt < 2) throw new RangeError(`cross-validated statistics: only ${nt} training spectra without batch group ${g + 1}`);
    const Sg = S[g]!;
    const sg = sums[g]!;
    // Σ over all rows of (x − centre) is 0, so the training rows sum to −sg: d = m_train − centre.
    for (let j = 0; j < p; j++) d[j] = -sg[j]! / nt;
    for (let j = 0; j < p; j++) mean[j] = centre[j]! + d[j]!;
    let tv = 0;
    for (let j = 0; j < p; j++) {
      const dj = d[j]!;
      for (let k = 0; k < p; k++) C[j * p + k] = (total[j * p + k]! - Sg[j * p + k]! - nt * dj * d[k]!) / (nt - 1);
      tv += C[j * p + j]!;
    }
    const Ak = Math.min(A, nt - 1, p);
    const eig = topSymmetricEigen(C, p, Ak, 1);
    for (let a = 0; a < Ak; a++) {
      if (!(eig.values[a]! > 0)) throw new RangeError(`cross-validated statistics: component ${a + 1} has variance ${eig.values[a]} without batch group ${g + 1}; ask for fewer components`);
    }
    fixSigns(eig.vectors, p, Ak);
    const m = {
      nComponents: Ak,
      nVariables: p,
      nSamples: nt,
      centered: true,
      mean: Float64Array.from(mean),
      loadings: denseMatrix(p, Ak, eig.vectors),
      eigenvalues: eig.values,
      totalVariance: tv,
    } as unknown as PcaModel;
    const proj = createProjector(m);
    for (const i of test) {
      const r = proj.project(X.data.subarray(i * p, (i + 1) * p));
      t2[i] = r.t2;
      q[i] = r.q;
    }
  }
  return { t2, q };
}
