/**
 * The optional property model of a monitoring model: PLS1 (core/pls) from the raw spectra, through
 * its own preprocessing chain (by default the model's chain), to a property (moisture, conversion),
 * with its own T²/Q so an extrapolating prediction is flagged. The calibration may be restricted to
 * a property range around the endpoint (a local calibration, common practice: the endpoint call
 * needs accuracy near the target, not over the whole batch). Component count 'auto' takes the
 * cross-validation recommendation (contiguous segments = whole batches when rows are stacked by batch).
 */
import { matrixFromRows } from '../linalg/dense-matrix.ts';
import { fitChain, loadChain, type ChainSpec, type FittedChain } from '../preprocess/index.ts';
import { kernelCrossValidatePls1 } from './pls-kernel-cv.ts';
import { createPls1Predictor, fitPls1, loadPls1, type Pls1Model } from '../pls/index.ts';

export interface PropertyPredictionValue {
  y: number;
  t2: number;
  q: number;
  extrapolating: boolean;
}

export interface PropertyModel {
  name: string;
  unit: string;
  components: number;
  rmsecv: number[] | null;
  /** Calibration range of the property, when restricted. */
  range: [number, number] | null;
  nCalibration: number;
  /** One raw spectrum; allocates nothing but the returned object. */
  predict(raw: ArrayLike<number>): PropertyPredictionValue;
  toJSON(): PropertyModelJson;
}

export interface PropertyModelJson {
  name: string;
  unit: string;
  rmsecv: number[] | null;
  range: [number, number] | null;
  nCalibration: number;
  chain: unknown;
  pls: unknown;
}

export interface PropertySpec {
  name: string;
  unit: string;
  components: number | 'auto';
  chain?: ChainSpec;
  range?: [number, number];
}

function wrap(name: string, unit: string, rmsecv: number[] | null, range: [number, number] | null, nCalibration: number, chain: FittedChain, model: Pls1Model): PropertyModel {
  const predictor = createPls1Predictor(model);
  const buf = new Float64Array(chain.outputAxis.length);
  return {
    name,
    unit,
    components: model.components,
    rmsecv,
    range,
    nCalibration,
    predict(raw) {
      chain.apply(raw, buf);
      const r = predictor.predict(buf);
      return { y: r.y, t2: r.t2, q: r.q, extrapolating: r.extrapolating };
    },
    toJSON() {
      return { name, unit, rmsecv, range, nCalibration, chain: chain.toJSON(), pls: model.toJSON() };
    },
  };
}

/** rows: raw spectra (stacked batch by batch); y: the property per row. */
/** withCv: also cross-validate a fixed component count (rmsecv up to it). */
export function fitPropertyModel(axis: ArrayLike<number>, rows: ArrayLike<number>[], y: ArrayLike<number>, spec: PropertySpec, modelChain: ChainSpec, withCv = false): PropertyModel {
  const keep: number[] = [];
  for (let i = 0; i < rows.length; i++) if (!spec.range || (y[i] >= spec.range[0] && y[i] <= spec.range[1])) keep.push(i);
  if (keep.length < 10) throw new RangeError(`property model: only ${keep.length} reference spectra have ${spec.name} within ${spec.range?.join('…')} ${spec.unit}; at least 10 are needed`);
  const raw = matrixFromRows(keep.map((i) => rows[i]));
  const yy = Float64Array.from(keep, (i) => y[i]);
  const chain = fitChain(spec.chain ?? modelChain, axis, raw);
  const X = chain.applyMatrix(raw);
  let A: number;
  let rmsecv: number[] | null = null;
  if (spec.components === 'auto') {
    // 10 contiguous segments (A1's crossValidatePls1 scheme) from cross-products: same figures to round-off, one data pass.
    const cv = kernelCrossValidatePls1(X, yy, Math.min(12, X.cols - 1, X.rows - Math.ceil(X.rows / 10) - 2), 10);
    rmsecv = Array.from(cv.rmsecv);
    A = cv.recommended;
  } else {
    A = spec.components;
    if (withCv) {
      // Cross-validated error at the chosen count (for a margin on the endpoint target).
      const cv = kernelCrossValidatePls1(X, yy, A, 10);
      rmsecv = Array.from(cv.rmsecv);
    }
  }
  return wrap(spec.name, spec.unit, rmsecv, spec.range ?? null, keep.length, chain, fitPls1(X, yy, { components: A, center: true }));
}

export function loadPropertyModel(json: unknown): PropertyModel {
  if (typeof json !== 'object' || json === null) throw new TypeError('monitoring model: pls must be an object');
  const j = json as PropertyModelJson;
  if (typeof j.name !== 'string' || typeof j.unit !== 'string') throw new TypeError('monitoring model: pls.name and pls.unit must be strings');
  const range = Array.isArray(j.range) && j.range.length === 2 ? ([Number(j.range[0]), Number(j.range[1])] as [number, number]) : null;
  return wrap(j.name, j.unit, Array.isArray(j.rmsecv) ? j.rmsecv : null, range, Number(j.nCalibration) || 0, loadChain(j.chain), loadPls1(j.pls));
}
