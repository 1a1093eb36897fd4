export type { PcaModel } from './pca-model.ts';
export { fitPca, scoreRows, columnMeans, type FitPcaOptions } from './fit-pca.ts';
export { createProjector, type Projection, type Projector } from './projector.ts';
export { pcaToJSON, pcaFromJSON, type PcaJson } from './pca-json.ts';
export { crossValidatePca, type PcaCrossValidation } from './cross-validate.ts';
export { topSymmetricEigen, type SymEigen } from './sym-eigen.ts';
