/**
 * Predict the property of one spectrum with its own X-model statistics: scores t = Rᵀ(x − x̄),
 * T² = Σ t_a²/s_a², Q = ‖(x − x̄) − Pt‖², and `extrapolating` when T² or Q exceeds its limit —
 * then the spectrum lies outside what the calibration covered and the prediction is not to be
 * trusted. Buffers are allocated once per predictor; the returned object (and its `scores`) is
 * reused by the next call: copy what you keep.
 */
import type { Pls1Model } from './pls-model.ts';

export interface Pls1Prediction {
  y: number;
  t2: number;
  q: number;
  t2Limit: number;
  qLimit: number;
  extrapolating: boolean;
  scores: Float64Array;
}

export function createPls1Predictor(m: Pls1Model): { predict(x: ArrayLike<number>): Pls1Prediction } {
  const p = m.nVariables;
  const A = m.components;
  const xc = new Float64Array(p);
  const scores = new Float64Array(A);
  const R = m.rotations.data;
  const P = m.loadings.data;
  const mean = m.xMean;
  const b = m.coefficients;
  const invVar = Float64Array.from(m.scoreVariance, (v) => 1 / v);
  const result: Pls1Prediction = { y: 0, t2: 0, q: 0, t2Limit: m.limits.t2Limit, qLimit: m.limits.qLimit, extrapolating: false, scores };
  return {
    predict(x) {
      if (x.length !== p) throw new RangeError(`PLS1 predict: the spectrum has ${x.length} values; the model has ${p} variables`);
      scores.fill(0);
      let yhat = m.intercept;
      for (let j = 0; j < p; j++) {
        const xj = x[j]!;
        const c = xj - mean[j]!;
        xc[j] = c;
        yhat += b[j]! * xj;
        const o = j * A;
        for (let a = 0; a < A; a++) scores[a]! += R[o + a]! * c;
      }
      let t2 = 0;
      for (let a = 0; a < A; a++) t2 += scores[a]! * scores[a]! * invVar[a]!;
      let q = 0;
      for (let j = 0; j < p; j++) {
        const o = j * A;
        let r = xc[j]!;
        for (let a = 0; a < A; a++) r -= P[o + a]! * scores[a]!;
        q += r * r;
      }
      result.y = yhat;
      result.t2 = t2;
      result.q = q;
      result.extrapolating = !(t2 <= result.t2Limit && q <= result.qLimit);
      return result;
    },
  };
}
