/** Spectral preprocessing: a validated, serializable chain of steps fitted on calibration spectra. */
export {
  type StepSpec,
  type ChainSpec,
  stepSpecSchema,
  chainSpecSchema,
  validateChainSpec,
  validateStepSpec,
  PreprocessSpecError,
  STEP_NAMES,
} from './spec.ts';
export { type FittedChain, type FittedChainJson, fittedChainJsonSchema, fitChain, loadChain, FITTED_CHAIN_FORMAT } from './chain.ts';
export { savgolCoefficients, savgolAllPositions } from './savgol-coefficients.ts';
export { SpectrumRefusedError } from './steps/snv.ts';
export { SAVGOL_SPACING_TOLERANCE } from './steps/savgol.ts';
