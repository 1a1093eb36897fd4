import type { DenseMatrix } from '../linalg/dense-matrix.ts';

/** A fitted PCA model (fitted state only; see fit-pca.ts). */
export interface PcaModel {
  nComponents: number;
  nVariables: number;
  nSamples: number;
  /** Whether the fit subtracted the column means (false when the chain already centres). */
  centered: boolean;
  /** Column means; zeros when fitted with center: false. */
  mean: Float64Array;
  /** p × A, columns orthonormal; sign fixed so the largest-|·| entry of each column is positive. */
  loadings: DenseMatrix;
  /** Score variances (n − 1 denominator), largest first, length A. */
  eigenvalues: Float64Array;
  /** Fractions of the total variance, per component and cumulative. */
  explained: number[];
  cumulative: number[];
  /** Sum of the variances of all variables (n − 1 denominator). */
  totalVariance: number;
  /** θ1, θ2, θ3 of the discarded components: trace(R), trace(R²), trace(R³) of the residual covariance R. */
  residualTheta: [number, number, number];
  /** T² and Q of each calibration row. */
  calibrationT2: Float64Array;
  calibrationQ: Float64Array;
}
