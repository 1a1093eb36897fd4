import fc from 'fast-check';
import { Matrix } from 'ml-matrix';
import { describe, expect, it } from 'vitest';
import { contributions, createContributionCalculator, sumOverRegions } from '../../core/contributions/index.ts';
import { denseMatrix } from '../../core/linalg/dense-matrix.ts';
import { createProjector, fitPca, type PcaModel } from '../../core/pca/index.ts';
import { lowRankData } from '../pca/synthetic.ts';

/** The worked case of docs/check-values.md as a model (Westerhuis, Gurden & Smilde 2000; Alcala & Qin 2009). */
function checksCaseModel(): PcaModel {
  return {
    nComponents: 2,
    nVariables: 4,
    nSamples: 10,
    centered: false,
    mean: new Float64Array(4),
    loadings: denseMatrix(4, 2, Float64Array.from([0.5, 0.5, 0.5, 0.5, 0.5, -0.5, 0.5, -0.5])),
    eigenvalues: Float64Array.from([2, 0.5]),
    explained: [0.5, 0.125],
    cumulative: [0.5, 0.625],
    totalVariance: 4,
    residualTheta: [1.5, 1, 1],
    calibrationT2: new Float64Array(10),
    calibrationQ: new Float64Array(10),
  };
}

const near = (got: ArrayLike<number>, want: number[], tol = 1e-12): void =>
  want.forEach((w, i) => expect(Math.abs(got[i]! - w)).toBeLessThan(tol));

describe('contributions: the worked case of docs/check-values.md', () => {
  const m = checksCaseModel();
  const x = [1, 0.5, -0.2, 0.3];
  it('scores, T², Q', () => {
    const r = createProjector(m).project(x);
    near(r.scores, [0.8, 0.7]);
    expect(r.t2).toBeCloseTo(1.3, 12);
    expect(r.q).toBeCloseTo(0.25, 12);
    near(r.residual, [0.25, -0.25, -0.25, 0.25]);
  });
  it('T² contributions (0.9, 0.45, 0.1, −0.15), Q contributions e², RBC (1.296, 1.296, 0.4, 0.4) and 0.125', () => {
    const c = contributions(m, x);
    near(c.t2, [0.9, 0.45, 0.1, -0.15]);
    near(c.q, [0.0625, 0.0625, 0.0625, 0.0625]);
    near(c.rbcT2, [1.296, 1.296, 0.4, 0.4]);
    near(c.rbcQ, [0.125, 0.125, 0.125, 0.125]);
  });
});

describe('contributions on a fitted model', () => {
  const { X } = lowRankData(200, 40, [5, 3, 2], 0.3, 3);
  const m = fitPca(X, { components: 2 });
  const calc = createContributionCalculator(m);
  const pr = createProjector(m);
  it('property: T² and Q contributions sum to T² and Q (fast-check)', () => {
    fc.assert(
      fc.property(fc.array(fc.double({ min: -50, max: 50, noNaN: true }), { minLength: 40, maxLength: 40 }), (x) => {
        const c = calc.compute(x);
        const r = pr.project(x);
        const st2 = c.t2.reduce((s, v) => s + v, 0);
        const sq = c.q.reduce((s, v) => s + v, 0);
        return Math.abs(st2 - r.t2) <= 1e-9 * (1 + r.t2) && Math.abs(sq - r.q) <= 1e-9 * (1 + r.q) && c.rbcT2.every((v) => v >= 0) && c.rbcQ.every((v) => v >= 0);
      }),
    );
  });
  it('RBC finds a fault along one variable: the faulty variable has the largest Q RBC (Alcala & Qin 2009)', () => {
    const x = Float64Array.from(X.data.subarray(0, 40));
    x[17] += 4;
    const c = calc.compute(x);
    let arg = 0;
    for (let j = 1; j < 40; j++) if (c.rbcQ[j]! > c.rbcQ[arg]!) arg = j;
    expect(arg).toBe(17);
  });
  it('RBC equals (ξᵀMx)²/(ξᵀMξ) with M formed explicitly (ml-matrix), for both metrics', () => {
    const P = new Matrix(40, 2);
    for (let j = 0; j < 40; j++) for (let a = 0; a < 2; a++) P.set(j, a, m.loadings.data[j * 2 + a]!);
    const Linv = Matrix.diag(Array.from(m.eigenvalues, (v) => 1 / v));
    const MT2 = P.mmul(Linv).mmul(P.transpose());
    const MQ = Matrix.eye(40).sub(P.mmul(P.transpose()));
    const x = Array.from(X.data.subarray(40 * 7, 40 * 8), (v, j) => v + (j === 3 ? 2 : 0));
    const xc = Matrix.columnVector(x.map((v, j) => v - m.mean[j]!));
    const c = calc.compute(x);
    const mxT = MT2.mmul(xc);
    const mxQ = MQ.mmul(xc);
    for (let j = 0; j < 40; j++) {
      const wantT = mxT.get(j, 0) ** 2 / MT2.get(j, j);
      const wantQ = mxQ.get(j, 0) ** 2 / MQ.get(j, j);
      expect(Math.abs(c.rbcT2[j]! - wantT)).toBeLessThan(1e-10 * (1 + wantT));
      expect(Math.abs(c.rbcQ[j]! - wantQ)).toBeLessThan(1e-10 * (1 + wantQ));
    }
  });
  it('refuses a spectrum of the wrong length', () => {
    expect(() => calc.compute([1, 2])).toThrow(/2 values, the model 40/);
  });
});

describe('sumOverRegions', () => {
  it('sums inclusive nm ranges and counts points', () => {
    const axis = [1000, 1100, 1200, 1300, 1400, 1450, 1500];
    const v = [1, 2, 3, 4, 5, 6, 7];
    const r = sumOverRegions(axis, v, [
      { name: 'C–H 2nd overtone', from: 1150, to: 1250 },
      { name: 'water 1450', from: 1400, to: 1500 },
      { name: 'empty', from: 1600, to: 1700 },
    ]);
    expect(r).toEqual([
      { name: 'C–H 2nd overtone', value: 3, count: 1 },
      { name: 'water 1450', value: 18, count: 3 },
      { name: 'empty', value: 0, count: 0 },
    ]);
  });
  it('names bad regions', () => {
    expect(() => sumOverRegions([1, 2], [1, 2], [{ name: 'x', from: 5, to: 1 }])).toThrow(/region 'x'/);
    expect(() => sumOverRegions([1, 2], [1], [])).toThrow(/axis has 2 points, values 1/);
  });
});
