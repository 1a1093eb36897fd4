import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { denseMatrix, matrixRow } from '../../core/linalg/dense-matrix.ts';
import { createProjector, fitPca, pcaFromJSON, pcaToJSON, scoreRows } from '../../core/pca/index.ts';
import { lowRankData } from './synthetic.ts';

const { X } = lowRankData(300, 80, [7, 5, 3, 2], 0.3, 11);
const model = fitPca(X, { components: 3 });

describe('PCA model JSON', () => {
  it('round-trips every float64 exactly through JSON text', () => {
    const back = pcaFromJSON(JSON.parse(JSON.stringify(pcaToJSON(model))));
    expect(back).toEqual(model);
    expect(Array.from(back.loadings.data)).toEqual(Array.from(model.loadings.data));
    // bit-identical projections after the round trip
    const a = createProjector(model).project(matrixRow(X, 5));
    const b = createProjector(back).project(matrixRow(X, 5));
    expect(b.t2).toBe(a.t2);
    expect(b.q).toBe(a.q);
  });
  it('refuses a wrong shape, naming the field', () => {
    const j = pcaToJSON(model) as Record<string, unknown>;
    expect(() => pcaFromJSON({ ...j, loadings: (j.loadings as number[]).slice(1) })).toThrow(/loadings has 239 values; 240 expected/);
    expect(() => pcaFromJSON({ ...j, format: 'other' })).toThrow(/format/);
    expect(() => pcaFromJSON({ ...j, eigenvalues: [1, -2, 3] })).toThrow(/eigenvalues/);
    expect(() => pcaFromJSON('nonsense')).toThrow(/PCA model JSON/);
  });
});

describe('fit', () => {
  it('is deterministic, and seed-independent to rounding', () => {
    const again = fitPca(X, { components: 3 });
    expect(again).toEqual(model);
    const otherSeed = fitPca(X, { components: 3, seed: 99 });
    for (let i = 0; i < model.loadings.data.length; i++) {
      expect(Math.abs(otherSeed.loadings.data[i]! - model.loadings.data[i]!)).toBeLessThan(1e-11);
    }
  });
  it('fixes signs: the largest-magnitude loading of each component is positive', () => {
    const { cols: A, data } = model.loadings;
    for (let a = 0; a < A; a++) {
      let best = 0;
      for (let j = 0; j < model.nVariables; j++) if (Math.abs(data[j * A + a]!) > Math.abs(best)) best = data[j * A + a]!;
      expect(best).toBeGreaterThan(0);
    }
  });
  it('loadings are orthonormal and eigenvalues are the score variances (n − 1)', () => {
    const { scores } = scoreRows(model, X);
    const { cols: A, data } = model.loadings;
    for (let a = 0; a < A; a++) {
      for (let b = 0; b < A; b++) {
        let s = 0;
        for (let j = 0; j < model.nVariables; j++) s += data[j * A + a]! * data[j * A + b]!;
        expect(Math.abs(s - (a === b ? 1 : 0))).toBeLessThan(1e-12);
      }
      let v = 0;
      for (let i = 0; i < X.rows; i++) v += scores.data[i * A + a]! ** 2;
      expect(Math.abs(v / (X.rows - 1) / model.eigenvalues[a]! - 1)).toBeLessThan(1e-12);
    }
  });
  it('names bad input', () => {
    expect(() => fitPca(X, { components: 0 })).toThrow(/components = 0/);
    expect(() => fitPca(X, { components: 81 })).toThrow(/from 1 to 80/);
    const bad = denseMatrix(3, 2, Float64Array.from([1, 2, 3, Number.NaN, 5, 6]));
    expect(() => fitPca(bad, { components: 1 })).toThrow(/X\[1\]\[1\] = NaN/);
    const flat = denseMatrix(4, 3, new Float64Array(12).fill(2));
    expect(() => fitPca(flat, { components: 1 })).toThrow(/rank below 1/);
  });
});

describe('projector', () => {
  it('reuses its buffers and reproduces the calibration T² and Q', () => {
    const pr = createProjector(model);
    const first = pr.project(matrixRow(X, 0));
    const scoresBuf = first.scores;
    for (let i = 0; i < X.rows; i++) {
      const r = pr.project(matrixRow(X, i));
      expect(r).toBe(first);
      expect(r.scores).toBe(scoresBuf);
      // calibration values come from the same projector code: identical, not merely close
      expect(r.t2).toBe(model.calibrationT2[i]);
      expect(r.q).toBe(model.calibrationQ[i]);
    }
    expect(() => pr.project(new Float64Array(3))).toThrow(/3 values, the model 80/);
  });
  it('property: a calibration row projects to its fitted scores; T², Q ≥ 0; residual ⟂ loadings (fast-check)', () => {
    const { scores } = scoreRows(model, X);
    const pr = createProjector(model);
    const A = model.nComponents;
    fc.assert(
      fc.property(fc.integer({ min: 0, max: X.rows - 1 }), (i) => {
        const r = pr.project(matrixRow(X, i));
        for (let a = 0; a < A; a++) if (Math.abs(r.scores[a]! - scores.data[i * A + a]!) > 1e-10) return false;
        return r.t2 >= 0 && r.q >= 0;
      }),
    );
    fc.assert(
      fc.property(fc.array(fc.double({ min: -1e3, max: 1e3, noNaN: true }), { minLength: 80, maxLength: 80 }), (x) => {
        const r = pr.project(x);
        if (!(r.t2 >= 0 && r.q >= 0)) return false;
        const P = model.loadings.data;
        let xn = 0;
        for (let j = 0; j < 80; j++) xn += (x[j]! - model.mean[j]!) ** 2;
        for (let a = 0; a < A; a++) {
          let s = 0;
          for (let j = 0; j < 80; j++) s += P[j * A + a]! * r.residual[j]!;
          if (Math.abs(s) > 1e-9 * Math.sqrt(xn + 1)) return false;
        }
        return true;
      }),
    );
  });
});
