/** Fit a PLS1 model: NIPALS, regression vector, X-model statistics and limits. */
import { denseMatrix, type DenseMatrix } from '../linalg/dense-matrix.ts';
import { makePls1Model, type Pls1Model } from './pls-model.ts';
import { checkPlsInput, coefficientsFor, nipalsPls1, rotationsFor } from './nipals.ts';
import { calibrationQ, plsXLimits, plsXLimitsFromCalibrationQ, PLS_THETA_MAX_GRAM, residualThetaOf } from './x-limits.ts';

export interface FitPls1Options {
  components: number;
  /** Mean-centre X and y (default true). */
  center?: boolean;
  /** Confidence of the X-model T² and Q limits (default 0.99). */
  confidence?: number;
}

export function fitPls1(X: DenseMatrix, y: ArrayLike<number>, opts: FitPls1Options): Pls1Model {
  const center = opts.center ?? true;
  const confidence = opts.confidence ?? 0.99;
  const A = opts.components;
  checkPlsInput(X, y, A, center, 'fitPls1');
  const fit = nipalsPls1(X, y, A, center);
  const { n, p } = fit;
  const R = rotationsFor(fit.W, fit.P, p, A, A);
  const b = coefficientsFor(R, fit.q, p, A);
  let intercept = fit.yMean;
  for (let j = 0; j < p; j++) intercept -= fit.xMean[j]! * b[j]!;
  const scoreVariance = new Float64Array(A);
  for (let a = 0; a < A; a++) {
    let ss = 0;
    let s = 0;
    for (let i = 0; i < n; i++) s += fit.T[i * A + a]!;
    const m = s / n;
    for (let i = 0; i < n; i++) ss += (fit.T[i * A + a]! - m) ** 2;
    scoreVariance[a] = ss / (n - 1);
  }
  const theta = Math.min(n, p) <= PLS_THETA_MAX_GRAM ? residualThetaOf(fit.E, n, p) : null;
  const limits = theta ? plsXLimits(A, n, theta, confidence) : plsXLimitsFromCalibrationQ(A, n, calibrationQ(fit.E, n, p), confidence);
  let lo = Infinity;
  let hi = -Infinity;
  for (let i = 0; i < n; i++) {
    lo = Math.min(lo, y[i]!);
    hi = Math.max(hi, y[i]!);
  }
  return makePls1Model({
    components: A,
    nSamples: n,
    nVariables: p,
    center,
    xMean: fit.xMean,
    yMean: fit.yMean,
    weights: denseMatrix(p, A, fit.W),
    loadings: denseMatrix(p, A, fit.P),
    yLoadings: fit.q,
    rotations: denseMatrix(p, A, R),
    coefficients: b,
    intercept,
    scoreVariance,
    residualTheta: theta,
    limits,
    yRange: [lo, hi],
  });
}
