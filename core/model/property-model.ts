/**
 * The optional property model of a monitoring model: PLS1 (core/pls) from the raw spectra, through
 * its own preprocessing chain (by default the model's chain), to a property (moisture, conversion),
 * with its own T²/Q so an extrapolating prediction is flagged.
 *
 * Calibration on sparse lab values: the reference batches carry a property value only where a lab
 * result exists (NaN elsewhere); the PLS is calibrated on those spectra only, optionally only on
 * values within a property range around the endpoint (a local calibration, common practice: the
 * endpoint call needs accuracy near the target, not over the whole batch). Cross-validation leaves
 * whole batches out (one fold per batch with lab values): spectra of one batch share its raw
 * material, probe state and bias, so predicting a batch from its own neighbours would understate
 * the error of a new batch. RMSECV per LV count and the bias (mean cross-validated residual, ŷ − y)
 * are kept with the model; the LV count 'auto' is chosen by the one-standard-error rule over the
 * batch folds (core/model/parsimony.ts).
 */
import { z } from 'zod';
import { matrixFromRows } from '../linalg/dense-matrix.ts';
import { fitChain, loadChain, type ChainSpec, type FittedChain } from '../preprocess/index.ts';
import { kernelCrossValidatePls1, type KernelCv } from './pls-kernel-cv.ts';
import { oneStandardErrorRule } from './parsimony.ts';
import { createPls1Predictor, fitPls1, loadPls1, type Pls1Model } from '../pls/index.ts';
import { makePls1Model } from '../pls/pls-model.ts';
import { sampleQuantile } from '../stats/sample-quantile.ts';
import { momentLimit } from '../envelope/moment-limit.ts';

export interface PropertyPredictionValue {
  y: number;
  t2: number;
  q: number;
  extrapolating: boolean;
}

/** The cross-validation evidence of a property model (Model bench, version detail). */
export interface PropertyEvidence {
  /** How the folds were made. */
  cvMethod: string;
  /** RMSECV per LV count, rmsecv[a − 1]; rmsecv0: predicting the training mean (no LV). */
  rmsecv: number[];
  rmsecv0: number;
  /** Mean cross-validated residual (ŷ − y) per LV count. */
  bias: number[];
  /** LVs in the model, and how they were chosen. */
  components: number;
  componentsRule: string;
  /** The count chosen is the largest searched (only for 'auto'). */
  atSearchLimit: boolean;
  /** Lab values used, and on how many batches (of how many reference batches). */
  nLabValues: number;
  nBatchesWithLab: number;
  nBatches: number;
  /** Batches with no lab value used (none at all, or none within the range). */
  batchesWithoutLab: string[];
  /** Range of the lab values used. */
  labRange: [number, number];
  /**
   * The extrapolation flag (prediction outside its calibration): limits of the PLS X-space T² and
   * Q calibrated over the whole batch range (absent in older files).
   */
  extrapolation?: { confidence: number; perStatistic: number; nSpectra: number; t2Limit: number; qLimit: number; method: string };
}

export interface PropertyModel {
  name: string;
  unit: string;
  components: number;
  rmsecv: number[] | null;
  /** Calibration range of the property, when restricted. */
  range: [number, number] | null;
  nCalibration: number;
  /** Cross-validation evidence (null in model files written before it was kept). */
  evidence: PropertyEvidence | null;
  /** Limits of the prediction's X-space T² and Q (beyond either: extrapolating), with their methods. */
  limits: Pls1Model['limits'];
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
  evidence?: PropertyEvidence;
  chain: unknown;
  pls: unknown;
}

export interface PropertySpec {
  name: string;
  unit: string;
  components: number | 'auto';
  chain?: ChainSpec;
  range?: [number, number];
  /** Confidence of the extrapolation flag (default 0.99): on good batches it should fire on about 1 − this of the spectra. */
  extrapolationConfidence?: number;
}

/** Least lab values, and least batches carrying them, a property model is calibrated from. */
export const MIN_LAB_VALUES = 10;
export const MIN_LAB_BATCHES = 3;
/** Largest LV count searched for 'auto'. */
export const MAX_LV_SEARCH = 12;

function wrap(name: string, unit: string, rmsecv: number[] | null, range: [number, number] | null, nCalibration: number, evidence: PropertyEvidence | null, chain: FittedChain, model: Pls1Model): PropertyModel {
  const predictor = createPls1Predictor(model);
  const buf = new Float64Array(chain.outputAxis.length);
  return {
    name,
    unit,
    components: model.components,
    rmsecv,
    range,
    nCalibration,
    evidence,
    limits: model.limits,
    predict(raw) {
      chain.apply(raw, buf);
      const r = predictor.predict(buf);
      return { y: r.y, t2: r.t2, q: r.q, extrapolating: r.extrapolating };
    },
    toJSON() {
      return { name, unit, rmsecv, range, nCalibration, ...(evidence ? { evidence } : {}), chain: chain.toJSON(), pls: model.toJSON() };
    },
  };
}

/** The reference spectra a property model is fitted from. */
export interface PropertyCalibrationInput {
  axis: ArrayLike<number>;
  /** Raw spectra, all kept reference spectra stacked batch by batch. */
  rows: ArrayLike<number>[];
  /** Lab value per row; NaN where the spectrum has none. */
  y: ArrayLike<number>;
  /** Reference batch index of each row, and the batch ids. */
  batchOfRow: ArrayLike<number>;
  batchIds: string[];
}

/** A fitted property model with what the rest of the build needs from its cross-validation. */
export interface PropertyFit {
  model: PropertyModel;
  /** Rows (indices into the input rows) the PLS was calibrated on. */
  calibrationRows: number[];
  /** Batch-left-out cross-validation (folds = batches with lab values, in order of first appearance). */
  cv: KernelCv;
  /** Reference batch index of each fold. */
  foldBatch: number[];
  /** The fitted property chain. */
  chain: FittedChain;
  /**
   * Every input row (not only the lab rows) through the model of its batch's fold — the PLS
   * calibrated without that batch's lab values; a batch without lab values took no part in the
   * calibration, so the final model is already "without it": the prediction and its X-space T²
   * (score variances of the fold's training rows) and Q (residual of the fold's loadings).
   */
  cvAll: { y: Float64Array; t2: Float64Array; q: Float64Array };
}

/** Least spectra expected beyond each limit for an empirical quantile (common practice, no published source). */
export const MIN_BEYOND_LIMIT = 10;

/**
 * Limits of the extrapolation flag from the batch-left-out T² and Q of all reference spectra: the
 * flag fires when T² or Q is beyond its limit, so each limit is at 1 − α/2, α = 1 − confidence
 * (Bonferroni over the two): on batches like the reference batches the flag fires on at most
 * about α of the spectra. Each limit is the sample quantile (Hyndman & Fan 1996 type 7) of its
 * statistic — over a whole batch the statistics are far from F or χ² forms (early, wet spectra lie
 * far from a calibration near the endpoint) — when at least MIN_BEYOND_LIMIT spectra are expected
 * beyond it (N·α/2 ≥ 10); with fewer spectra the quantile is poorly determined, and g·χ²_h matched
 * to the mean and variance of the statistic is used instead (Box 1954; Nomikos & MacGregor 1995),
 * which the method text says.
 */
export function extrapolationLimits(t2: ArrayLike<number>, q: ArrayLike<number>, confidence: number): NonNullable<PropertyEvidence['extrapolation']> {
  if (!(confidence > 0.5 && confidence < 1)) throw new RangeError(`property model: extrapolation confidence ${confidence} must lie in (0.5, 1)`);
  const N = t2.length;
  if (N < 2 || q.length !== N) throw new RangeError(`property model: ${N} T² and ${q.length} Q values to calibrate the extrapolation flag; at least 2 of each are needed`);
  const per = 1 - (1 - confidence) / 2;
  const pct = +(per * 100).toFixed(4);
  const empirical = N * (1 - per) >= MIN_BEYOND_LIMIT;
  const what = `over all ${N} reference spectra, each seen by the PLS calibrated without its batch (whole batch range, not only the lab rows)`;
  const after = `T² or Q beyond its limit flags the prediction as outside its calibration, on about ${+((1 - confidence) * 100).toFixed(3)} % of the spectra of batches like the reference batches (Bonferroni over the two statistics)`;
  return {
    confidence,
    perStatistic: per,
    nSpectra: N,
    t2Limit: empirical ? sampleQuantile(t2, per) : momentLimit(t2, per),
    qLimit: empirical ? sampleQuantile(q, per) : momentLimit(q, per),
    method: empirical
      ? `T² and Q of the PLS X model: each limit is the ${pct} % sample quantile (Hyndman & Fan 1996, type 7) of the statistic ${what}; ${after}`
      : `T² and Q of the PLS X model: each limit is g·χ²_h at ${pct} % matched to the mean and variance of the statistic ${what} (Box 1954, as Nomikos & MacGregor 1995 use it) — too few spectra for an empirical ${pct} % quantile (at least ${Math.ceil(MIN_BEYOND_LIMIT / (1 - per))} give ${MIN_BEYOND_LIMIT} beyond it); ${after}`,
  };
}

/** Per-row prediction, T² and Q of every input row from the model that left out its batch (see PropertyFit.cvAll). */
function crossValidatedRows(input: PropertyCalibrationInput, chain: FittedChain, cv: KernelCv, foldBatch: number[], final: Pls1Model): PropertyFit['cvAll'] {
  const n = input.rows.length;
  const p = chain.outputAxis.length;
  const A = final.components;
  const y = new Float64Array(n);
  const t2 = new Float64Array(n);
  const q = new Float64Array(n);
  const foldOf = new Map<number, number>();
  foldBatch.forEach((b, f) => foldOf.set(b, f));
  const x = new Float64Array(p);
  const xc = new Float64Array(p);
  const t = new Float64Array(A);
  // The final model in the same form as a fold's (rows: component a, p values).
  const fR = new Float64Array(A * p);
  const fP = new Float64Array(A * p);
  for (let j = 0; j < p; j++) for (let a = 0; a < A; a++) { fR[a * p + j] = final.rotations.data[j * A + a]!; fP[a * p + j] = final.loadings.data[j * A + a]!; }
  const fVar = final.scoreVariance;
  const fB = final.coefficients;
  for (let i = 0; i < n; i++) {
    chain.apply(input.rows[i]!, x);
    const f = foldOf.get(input.batchOfRow[i]!);
    const fm = f === undefined ? null : cv.foldModels![f]!;
    const mean = fm ? fm.xMean : final.xMean;
    const R = fm ? fm.R : fR;
    const P = fm ? fm.P : fP;
    const bOff = (A - 1) * p;
    let yh = fm ? fm.yMean : final.yMean;
    for (let j = 0; j < p; j++) {
      xc[j] = x[j]! - mean[j]!;
      yh += xc[j]! * (fm ? fm.B[bOff + j]! : fB[j]!);
    }
    let s2 = 0;
    for (let a = 0; a < A; a++) {
      let ta = 0;
      for (let j = 0; j < p; j++) ta += R[a * p + j]! * xc[j]!;
      t[a] = ta;
      const v = fm ? fm.tt[a]! / (fm.nTrain - 1) : fVar[a]!;
      s2 += (ta * ta) / v;
    }
    let qq = 0;
    for (let j = 0; j < p; j++) {
      let r = xc[j]!;
      for (let a = 0; a < A; a++) r -= t[a]! * P[a * p + j]!;
      qq += r * r;
    }
    y[i] = yh;
    t2[i] = s2;
    q[i] = qq;
  }
  return { y, t2, q };
}

function rmsecvOf(pred: Float64Array, y: Float64Array): number {
  let s = 0;
  for (let i = 0; i < y.length; i++) s += (pred[i]! - y[i]!) ** 2;
  return Math.sqrt(s / y.length);
}

/**
 * Fit the property model on the spectra with lab values. Refuses, naming the property and the
 * batches, when there are fewer than MIN_LAB_VALUES lab values or fewer than MIN_LAB_BATCHES
 * batches carrying them (whole batches are left out in cross-validation), or when the spectra do
 * not predict the property better than its mean.
 */
export function fitPropertyModel(input: PropertyCalibrationInput, spec: PropertySpec, modelChain: ChainSpec): PropertyFit {
  const { rows, y, batchOfRow, batchIds } = input;
  if (y.length !== rows.length || batchOfRow.length !== rows.length) throw new RangeError(`property model: ${rows.length} spectra, ${y.length} lab values, ${batchOfRow.length} batch labels`);
  const inRange = (v: number) => !spec.range || (v >= spec.range[0] && v <= spec.range[1]);
  const keep: number[] = [];
  const anyLab = new Set<number>();
  for (let i = 0; i < rows.length; i++) {
    const v = y[i]!;
    if (!Number.isFinite(v)) continue;
    anyLab.add(batchOfRow[i]!);
    if (inRange(v)) keep.push(i);
  }
  const within = spec.range ? ` within ${spec.range[0]}…${spec.range[1]} ${spec.unit}` : '';
  const what = `${spec.name}${spec.unit ? ` (${spec.unit})` : ''}`;
  if (anyLab.size === 0) throw new RangeError(`property model: none of the ${batchIds.length} reference batches has lab values of ${what}; give lab values (import a property column, or POST /api/batches/:batch/lab-values) or build without a property model`);
  const labBatches = [...new Set(keep.map((i) => batchOfRow[i]!))].sort((a, b) => a - b);
  const without = batchIds.filter((_, b) => !labBatches.includes(b));
  if (labBatches.length < MIN_LAB_BATCHES) {
    throw new RangeError(
      `property model: lab values of ${what}${within} on only ${labBatches.length} reference batch${labBatches.length === 1 ? '' : 'es'}${labBatches.length ? ` (${labBatches.map((b) => batchIds[b]).join(', ')})` : ''}; ` +
        `cross-validation leaves whole batches out and needs lab values on at least ${MIN_LAB_BATCHES}`,
    );
  }
  if (keep.length < MIN_LAB_VALUES) throw new RangeError(`property model: only ${keep.length} lab values of ${what}${within} on the reference batches; at least ${MIN_LAB_VALUES} are needed`);
  const raw = matrixFromRows(keep.map((i) => rows[i]!));
  const yy = Float64Array.from(keep, (i) => y[i]!);
  const chain = fitChain(spec.chain ?? modelChain, input.axis, raw);
  const X = chain.applyMatrix(raw);
  // Folds: one per batch with lab values, numbered in order.
  const foldOfBatch = new Map<number, number>();
  labBatches.forEach((b, f) => foldOfBatch.set(b, f));
  const seg = Int32Array.from(keep, (i) => foldOfBatch.get(batchOfRow[i]!)!);
  const foldSize = new Int32Array(labBatches.length);
  for (const f of seg) foldSize[f]!++;
  const smallestTrain = keep.length - Math.max(...foldSize);
  const maxA = Math.min(MAX_LV_SEARCH, X.cols - 1, smallestTrain - 2);
  if (maxA < 1) throw new RangeError(`property model: too few lab values to cross-validate (${smallestTrain} training values when the largest batch is left out)`);
  const searched = spec.components === 'auto' ? maxA : spec.components;
  if (spec.components !== 'auto' && spec.components > maxA) {
    throw new RangeError(`property model: ${spec.components} LVs asked; at most ${maxA} can be cross-validated with ${keep.length} lab values on ${labBatches.length} batches (${X.cols} variables)`);
  }
  const cv = kernelCrossValidatePls1(X, yy, searched, seg, { keepFolds: true });
  const n = yy.length;
  const rmsecv = cv.predictions.map((p) => rmsecvOf(p, yy));
  const bias = cv.predictions.map((p) => {
    let s = 0;
    for (let i = 0; i < n; i++) s += p[i]! - yy[i]!;
    return s / n;
  });
  // Intercept-only model per fold: the training mean.
  let ss0 = 0;
  let sumAll = 0;
  for (let i = 0; i < n; i++) sumAll += yy[i]!;
  const foldSum = new Float64Array(labBatches.length);
  for (let i = 0; i < n; i++) foldSum[seg[i]!] += yy[i]!;
  for (let i = 0; i < n; i++) {
    const f = seg[i]!;
    ss0 += ((sumAll - foldSum[f]!) / (n - foldSize[f]!) - yy[i]!) ** 2;
  }
  const rmsecv0 = Math.sqrt(ss0 / n);
  const fmt = (v: number) => v.toPrecision(3);
  const describe = (a: number) => `RMSECV ${fmt(rmsecv[a - 1]!)} ${spec.unit}`;
  let A: number;
  let rule: string;
  let atLimit = false;
  if (spec.components === 'auto') {
    // Fold errors: mean squared CV residual of each batch.
    const foldErr = cv.predictions.map((p) => {
      const s = new Float64Array(labBatches.length);
      for (let i = 0; i < n; i++) s[seg[i]!] += (p[i]! - yy[i]!) ** 2;
      return Array.from(s, (v, f) => v / foldSize[f]!);
    });
    const choice = oneStandardErrorRule(rmsecv.map((r) => r * r), foldErr, 'LV', describe);
    A = choice.chosen;
    atLimit = choice.atLimit;
    rule = choice.text;
  } else {
    A = spec.components;
    rule = `fixed by the model owner (${A} LV, ${describe(A)})`;
  }
  const bestRmsecv = Math.min(...rmsecv);
  if (!(bestRmsecv < rmsecv0)) {
    throw new RangeError(
      `property model: the spectra do not predict ${spec.name} better than the mean of its lab values (RMSECV ${fmt(bestRmsecv)} ${spec.unit} at best, ${fmt(rmsecv0)} ${spec.unit} with no LV); check the lab values, their spectra and the preprocessing`,
    );
  }
  let lo = Infinity;
  let hi = -Infinity;
  for (const v of yy) {
    lo = Math.min(lo, v);
    hi = Math.max(hi, v);
  }
  const evidence: PropertyEvidence = {
    cvMethod: `leave-one-batch-out: ${labBatches.length} folds, each the lab values of one reference batch`,
    rmsecv,
    rmsecv0,
    bias,
    components: A,
    componentsRule: rule,
    atSearchLimit: atLimit,
    nLabValues: n,
    nBatchesWithLab: labBatches.length,
    nBatches: batchIds.length,
    batchesWithoutLab: without,
    labRange: [lo, hi],
  };
  const fitted = fitPls1(X, yy, { components: A, center: true });
  const cvAll = crossValidatedRows(input, chain, cv, labBatches, fitted);
  // The extrapolation flag calibrated over the whole batch range: limits of T² and Q from every
  // reference spectrum (not only the lab rows), each seen by the model without its batch.
  const xc = spec.extrapolationConfidence ?? 0.99;
  const x = extrapolationLimits(cvAll.t2, cvAll.q, xc);
  evidence.extrapolation = x;
  const pls = makePls1Model({ ...fitted, limits: { confidence: xc, t2Limit: x.t2Limit, t2Method: 't2-cv-quantile', qLimit: x.qLimit, qMethod: 'q-cv-quantile' } });
  const model = wrap(spec.name, spec.unit, rmsecv, spec.range ?? null, n, evidence, chain, pls);
  return { model, calibrationRows: keep, cv, foldBatch: labBatches, chain, cvAll };
}

const finite = z.number().refine(Number.isFinite, { message: 'must be a finite number' });
const evidenceSchema = z.object({
  cvMethod: z.string(),
  rmsecv: z.array(finite).min(1),
  rmsecv0: finite,
  bias: z.array(finite).min(1),
  components: z.number().int().min(1),
  componentsRule: z.string(),
  atSearchLimit: z.boolean(),
  nLabValues: z.number().int().min(1),
  nBatchesWithLab: z.number().int().min(1),
  nBatches: z.number().int().min(1),
  batchesWithoutLab: z.array(z.string()),
  labRange: z.tuple([finite, finite]),
  extrapolation: z.object({ confidence: finite, perStatistic: finite, nSpectra: z.number().int().min(1), t2Limit: finite, qLimit: finite, method: z.string() }).optional(),
});

export function loadPropertyModel(json: unknown): PropertyModel {
  if (typeof json !== 'object' || json === null) throw new TypeError('monitoring model: pls must be an object');
  const j = json as PropertyModelJson;
  if (typeof j.name !== 'string' || typeof j.unit !== 'string') throw new TypeError('monitoring model: pls.name and pls.unit must be strings');
  const range = Array.isArray(j.range) && j.range.length === 2 ? ([Number(j.range[0]), Number(j.range[1])] as [number, number]) : null;
  let evidence: PropertyEvidence | null = null;
  if (j.evidence !== undefined) {
    const r = evidenceSchema.safeParse(j.evidence);
    if (!r.success) throw new RangeError(`monitoring model: pls.evidence.${r.error.issues[0]!.path.join('.')}: ${r.error.issues[0]!.message}`);
    evidence = r.data as PropertyEvidence;
  }
  return wrap(j.name, j.unit, Array.isArray(j.rmsecv) ? j.rmsecv : null, range, Number(j.nCalibration) || 0, evidence, loadChain(j.chain), loadPls1(j.pls));
}
