/**
 * Fitting and applying a preprocessing chain. `fitChain` compiles the steps one after another on
 * the calibration spectra (each step learns from the output of the steps before it: the MSC
 * reference, the centre and scale); `apply` then corrects one raw spectrum at a time through
 * preallocated buffers. `toJSON`/`loadChain` round-trip exactly: the learned vectors are stored as
 * JSON numbers (shortest round-trip form of each float64) and everything else (Savitzky–Golay
 * coefficients, interpolation weights, detrend basis) is recomputed deterministically from the
 * spec and the axis.
 */
import { z } from 'zod';
import { denseMatrix, type DenseMatrix } from '../linalg/dense-matrix.ts';
import { PreprocessSpecError, stepSpecSchema, validateChainSpec, type ChainSpec, type StepSpec } from './spec.ts';
import type { Stage, StageState } from './stage.ts';
import { compileRangeStep } from './steps/range-select.ts';
import { compileResample, evenGrid } from './steps/resample.ts';
import { compileSnv } from './steps/snv.ts';
import { compileMsc, mscReferenceFromCalibration } from './steps/msc.ts';
import { compileDetrend } from './steps/detrend.ts';
import { compileSavgol } from './steps/savgol.ts';
import { compileScale, scaleStateFromCalibration } from './steps/scale.ts';

export const FITTED_CHAIN_FORMAT = 'tideline-preprocess-chain';

const finiteNumber = z.number().refine(Number.isFinite, { message: 'must be a finite number' });
const stageStateSchema = z.union([
  z.null(),
  z.strictObject({ reference: z.array(finiteNumber) }),
  z.strictObject({ center: z.array(finiteNumber).nullable(), scale: z.array(finiteNumber).nullable() }),
]);
export const fittedChainJsonSchema = z.strictObject({
  format: z.literal(FITTED_CHAIN_FORMAT),
  spec: z.array(stepSpecSchema),
  inputAxis: z.array(finiteNumber).min(1),
  outputAxis: z.array(finiteNumber),
  fitted: z.array(stageStateSchema),
});
export type FittedChainJson = z.infer<typeof fittedChainJsonSchema>;

export interface FittedChain {
  readonly spec: ChainSpec;
  /** nm, raw */
  readonly inputAxis: Float64Array;
  /** nm of the variables after select/exclude/resample */
  readonly outputAxis: Float64Array;
  /** Apply to one raw spectrum. With `out` given (length = outputAxis.length), allocates nothing. Returns out. */
  apply(raw: ArrayLike<number>, out?: Float64Array): Float64Array;
  /** Apply to many (rows = spectra). */
  applyMatrix(raw: DenseMatrix): DenseMatrix;
  toJSON(): FittedChainJson;
}

function checkAxis(axis: ArrayLike<number>): Float64Array {
  if (axis.length < 1) throw new RangeError('preprocessing: the wavelength axis is empty');
  const a = Float64Array.from(axis);
  for (let j = 0; j < a.length; j++) {
    if (!Number.isFinite(a[j]!)) throw new RangeError(`preprocessing: wavelength ${j} of the axis is not a finite number (${a[j]})`);
    if (j > 0 && !(a[j]! > a[j - 1]!)) throw new RangeError(`preprocessing: the wavelength axis must increase strictly; value ${j} (${a[j]} nm) is not above value ${j - 1} (${a[j - 1]} nm)`);
  }
  return a;
}

/** Compile one step; `state` is the stored state on load, undefined when fitting from `calib`. */
function compileStep(s: StepSpec, i: number, axis: Float64Array, state: StageState | undefined, calib: DenseMatrix | null): Stage {
  switch (s.step) {
    case 'select':
    case 'exclude':
      return compileRangeStep(i, s.step, s.ranges, axis);
    case 'resample':
      return compileResample(i, s.axis ?? evenGrid(axis, s.points ?? axis.length), axis);
    case 'snv':
      return compileSnv(i, axis);
    case 'detrend':
      return compileDetrend(i, s.order, axis);
    case 'savgol':
      return compileSavgol(i, s.window, s.polyorder, s.deriv, axis);
    case 'msc': {
      let ref: number[];
      if (state !== undefined) {
        if (state === null || !('reference' in state)) throw new PreprocessSpecError(i, 'msc', null, 'stored state lacks the reference spectrum');
        ref = state.reference;
      } else {
        if (!calib || calib.rows < 1) throw new PreprocessSpecError(i, 'msc', null, 'needs at least one calibration spectrum');
        ref = mscReferenceFromCalibration(calib.data, calib.rows, calib.cols);
      }
      return compileMsc(i, axis, ref);
    }
    case 'scale': {
      let st: { center: number[] | null; scale: number[] | null };
      if (state !== undefined) {
        if (state === null || !('center' in state)) throw new PreprocessSpecError(i, 'scale', null, 'stored state lacks centre and scale');
        if ((state.center !== null) !== s.center) throw new PreprocessSpecError(i, 'scale', 'center', `spec says center=${s.center} but the stored state ${state.center ? 'has' : 'lacks'} a centre`);
        if ((state.scale !== null) !== (s.scaling !== 'none')) throw new PreprocessSpecError(i, 'scale', 'scaling', `spec says scaling='${s.scaling}' but the stored state ${state.scale ? 'has' : 'lacks'} a scale`);
        st = state;
      } else {
        if (!calib) throw new PreprocessSpecError(i, 'scale', null, 'needs calibration spectra');
        st = scaleStateFromCalibration(i, s.center, s.scaling, calib.data, calib.rows, axis);
      }
      return compileScale(i, axis, st);
    }
  }
}

function stageMatrix(stage: Stage, m: DenseMatrix): DenseMatrix {
  const out = denseMatrix(m.rows, stage.outLength);
  for (let r = 0; r < m.rows; r++) {
    stage.apply(m.data.subarray(r * m.cols, (r + 1) * m.cols), out.data.subarray(r * stage.outLength, (r + 1) * stage.outLength));
  }
  return out;
}

function assemble(spec: ChainSpec, inputAxis: Float64Array, stages: Stage[]): FittedChain {
  const nIn = inputAxis.length;
  const outputAxis = stages.length ? stages[stages.length - 1]!.outAxis : inputAxis;
  const nOut = outputAxis.length;
  let maxLen = nIn;
  for (const s of stages) maxLen = Math.max(maxLen, s.outLength);
  const bufA = new Float64Array(maxLen);
  const bufB = new Float64Array(maxLen);
  const last = stages.length - 1;
  const fitted = stages.map((s) => s.fitted);

  const chain: FittedChain = {
    spec,
    inputAxis,
    outputAxis,
    apply(raw, out) {
      if (raw.length !== nIn) throw new RangeError(`preprocessing: the spectrum has ${raw.length} values; the chain expects ${nIn} (its input axis)`);
      const dst = out ?? new Float64Array(nOut);
      if (dst.length !== nOut) throw new RangeError(`preprocessing: output buffer has ${dst.length} values; the chain produces ${nOut}`);
      for (let j = 0; j < nIn; j++) {
        const v = raw[j]!;
        if (v - v !== 0) throw new RangeError(`preprocessing: raw value ${j} (${inputAxis[j]} nm) is ${v}; spectra must hold finite numbers`);
      }
      if (last < 0) {
        for (let j = 0; j < nIn; j++) dst[j] = raw[j]!;
        return dst;
      }
      let src: ArrayLike<number> = raw;
      if ((raw as unknown) === dst) {
        // In place: read from a copy, so no step sees its own output as input.
        for (let j = 0; j < nIn; j++) bufB[j] = raw[j]!;
        src = bufB;
      }
      for (let k = 0; k <= last; k++) {
        const target = k === last ? dst : (k & 1) === 0 ? bufA : bufB;
        stages[k]!.apply(src, target);
        src = target;
      }
      return dst;
    },
    applyMatrix(raw) {
      if (raw.cols !== nIn) throw new RangeError(`preprocessing: the matrix has ${raw.cols} columns; the chain expects ${nIn}`);
      const out = denseMatrix(raw.rows, nOut);
      for (let r = 0; r < raw.rows; r++) {
        chain.apply(raw.data.subarray(r * nIn, (r + 1) * nIn), out.data.subarray(r * nOut, (r + 1) * nOut));
      }
      return out;
    },
    toJSON() {
      return {
        format: FITTED_CHAIN_FORMAT,
        spec: structuredClone(spec),
        inputAxis: Array.from(inputAxis),
        outputAxis: Array.from(outputAxis),
        fitted: fitted.map((f) => (f === null ? null : structuredClone(f))),
      };
    },
  };
  return chain;
}

/** Fit the chain on calibration spectra (rows, on `axis`), validating the spec first. */
export function fitChain(spec: ChainSpec, axis: ArrayLike<number>, calibration: DenseMatrix): FittedChain {
  const steps = validateChainSpec(spec);
  const inputAxis = checkAxis(axis);
  if (calibration.cols !== inputAxis.length) {
    throw new RangeError(`preprocessing: calibration spectra have ${calibration.cols} values; the axis has ${inputAxis.length}`);
  }
  for (let k = 0; k < calibration.data.length; k++) {
    const v = calibration.data[k]!;
    if (!Number.isFinite(v)) {
      const c = k % calibration.cols;
      throw new RangeError(`preprocessing: calibration spectrum ${Math.floor(k / calibration.cols)}, value ${c} (${inputAxis[c]} nm) is ${v}`);
    }
  }
  const stages: Stage[] = [];
  let cur: DenseMatrix = calibration;
  let curAxis = inputAxis;
  steps.forEach((s, i) => {
    const stage = compileStep(s, i, curAxis, undefined, cur);
    stages.push(stage);
    if (i < steps.length - 1) cur = stageMatrix(stage, cur);
    curAxis = stage.outAxis;
  });
  return assemble(steps, inputAxis, stages);
}

/** Rebuild a fitted chain from its JSON; validates the shape (zod) and the spec. */
export function loadChain(json: unknown): FittedChain {
  const r = fittedChainJsonSchema.safeParse(json);
  if (!r.success) {
    const issue = r.error.issues[0]!;
    throw new RangeError(`preprocessing chain JSON: ${issue.path.join('.') || '(root)'}: ${issue.message}`);
  }
  const j = r.data;
  const steps = validateChainSpec(j.spec);
  if (j.fitted.length !== steps.length) throw new RangeError(`preprocessing chain JSON: ${steps.length} steps but ${j.fitted.length} stored states`);
  const inputAxis = checkAxis(j.inputAxis);
  const stages: Stage[] = [];
  let curAxis = inputAxis;
  steps.forEach((s, i) => {
    const stage = compileStep(s, i, curAxis, j.fitted[i] ?? null, null);
    stages.push(stage);
    curAxis = stage.outAxis;
  });
  const chain = assemble(steps, inputAxis, stages);
  const oa = chain.outputAxis;
  if (oa.length !== j.outputAxis.length || j.outputAxis.some((v, k) => !Object.is(v, oa[k]))) {
    throw new RangeError('preprocessing chain JSON: the stored output axis does not match the one the spec produces');
  }
  return chain;
}
