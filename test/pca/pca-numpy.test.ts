/**
 * PCA against numpy.linalg.svd on the same data (python3 + numpy at test time): eigenvalues,
 * loadings up to sign, scores, T², Q and θ1..θ3 of the discarded part, ≤ 1e-8 relative
 * (the tolerance for well-conditioned data).
 */
import { describe, expect, it } from 'vitest';
import { fitPca, scoreRows } from '../../core/pca/index.ts';
import { numpyPcaMany } from './numpy-reference.ts';
import { lowRankData } from './synthetic.ts';

function maxRel(a: ArrayLike<number>, b: ArrayLike<number>): number {
  let scale = 0;
  let diff = 0;
  for (let i = 0; i < b.length; i++) scale = Math.max(scale, Math.abs(b[i]!));
  for (let i = 0; i < b.length; i++) diff = Math.max(diff, Math.abs(a[i]! - b[i]!));
  return diff / scale;
}

const TOL = 1e-8;

const cases: { name: string; n: number; p: number; A: number; sds: number[]; noise: number; center: boolean }[] = [
  { name: 'small, full eigendecomposition route', n: 400, p: 60, A: 4, sds: [9, 6, 4, 3, 1.5], noise: 0.3, center: true },
  { name: 'tall 5,000 × 300, Lanczos route', n: 5000, p: 300, A: 6, sds: [12, 9, 7, 5, 4, 3, 2], noise: 0.2, center: true },
  { name: 'p > n: 80 × 400', n: 80, p: 400, A: 5, sds: [8, 6, 5, 4, 3, 1], noise: 0.5, center: true },
  { name: 'p > n: 200 × 500, row Gram by Lanczos', n: 200, p: 500, A: 3, sds: [8, 5, 3, 1], noise: 0.4, center: true },
  { name: 'uncentred (chain already centres): 400 × 120', n: 400, p: 120, A: 3, sds: [6, 4, 2], noise: 0.5, center: false },
];

describe('fitPca vs numpy.linalg.svd', () => {
  const data = cases.map(({ n, p, A, sds, noise, center }) => ({ X: lowRankData(n, p, sds, noise, n + p, center ? 5 : 0).X, A, center }));
  const refs = numpyPcaMany(data);
  it.each(cases.map((c, i) => ({ ...c, i })))('$name', ({ p, A, center, i }) => {
    const X = data[i]!.X;
    const m = fitPca(X, { components: A, center });
    const ref = refs[i]!;
    expect(maxRel(m.eigenvalues, ref.eigenvalues)).toBeLessThan(TOL);
    // loadings up to sign: align each column with numpy's
    const P = m.loadings.data;
    const signs: number[] = [];
    for (let a = 0; a < A; a++) {
      let d = 0;
      for (let j = 0; j < p; j++) d += P[j * A + a]! * ref.loadings[j * A + a]!;
      expect(Math.abs(Math.abs(d) - 1)).toBeLessThan(1e-10);
      signs.push(Math.sign(d));
    }
    expect(maxRel(P, ref.loadings.map((v, i) => v * signs[i % A]!))).toBeLessThan(TOL);
    const { scores, t2, q } = scoreRows(m, X);
    expect(maxRel(scores.data, ref.scores.map((v, i) => v * signs[i % A]!))).toBeLessThan(TOL);
    expect(maxRel(m.calibrationT2, ref.t2)).toBeLessThan(TOL);
    expect(maxRel(m.calibrationQ, ref.q)).toBeLessThan(TOL);
    expect(maxRel(t2, ref.t2)).toBeLessThan(TOL);
    expect(maxRel(q, ref.q)).toBeLessThan(TOL);
    for (let i = 0; i < 3; i++) expect(Math.abs(m.residualTheta[i]! / ref.theta[i]! - 1)).toBeLessThan(TOL);
    expect(Math.abs(m.totalVariance / ref.total - 1)).toBeLessThan(TOL);
    // explained / cumulative are fractions of the same total
    let cum = 0;
    for (let a = 0; a < A; a++) {
      cum += ref.eigenvalues[a]! / ref.total;
      expect(Math.abs(m.explained[a]! - ref.eigenvalues[a]! / ref.total)).toBeLessThan(1e-10);
      expect(Math.abs(m.cumulative[a]! - cum)).toBeLessThan(1e-10);
    }
  });
});
