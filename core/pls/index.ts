/** PLS1 regression of one property on spectra, with X-model statistics to flag extrapolation. */
export { type Pls1Model, type Pls1Json, pls1JsonSchema, loadPls1, PLS1_FORMAT } from './pls-model.ts';
export { fitPls1, type FitPls1Options } from './fit-pls1.ts';
export { createPls1Predictor, type Pls1Prediction } from './predictor.ts';
export { crossValidatePls1, type CrossValidatePls1Options, type Pls1CrossValidation } from './cross-validate.ts';
export { regressionMetrics, type RegressionMetrics } from './metrics.ts';
export { residualThetaOf, plsXLimits, plsXLimitsFromCalibrationQ, calibrationQ, PLS_THETA_MAX_GRAM, type PlsXLimits } from './x-limits.ts';
