/**
 * A fitted standardisation (core/calibration-transfer/standardisation.ts) as the head of a model's
 * preprocessing: the stored form of the transform in a model file, and a chain whose input is the
 * new analyzer's axis — each raw spectrum is first mapped onto the old analyzer's axis and response
 * (x_slave F + b), then goes through the model's own chain unchanged. Everything that reads a chain
 * (batch monitor, property model, bad-pixel footprint, axis checks at deploy and import) then sees
 * the new analyzer's axis as the model's input axis, with no other change.
 */
import { z } from 'zod';
import type { DenseMatrix } from '../linalg/dense-matrix.ts';
import { denseMatrix } from '../linalg/dense-matrix.ts';
import type { FittedChain, FittedChainJson } from '../preprocess/index.ts';
import { applyStandardisation, type Standardisation } from './standardisation.ts';

const finite = z.number().finite();
const axisSchema = z.array(finite).min(1);

export const standardisationJsonSchema = z.discriminatedUnion('method', [
  z.strictObject({ method: z.literal('ds'), masterAxis: axisSchema, slaveAxis: axisSchema, F: z.array(finite), offset: z.array(finite), rank: z.number().int().min(0) }),
  z.strictObject({
    method: z.literal('pds'), masterAxis: axisSchema, slaveAxis: axisSchema, window: z.number().int().min(1),
    start: z.array(z.number().int().min(0)), length: z.array(z.number().int().min(1)), coef: z.array(finite), offset: z.array(finite), ranks: z.array(z.number().int().min(0)),
  }),
]);
export type StandardisationJson = z.infer<typeof standardisationJsonSchema>;

export function standardisationToJSON(t: Standardisation): StandardisationJson {
  if (t.method === 'ds') return { method: 'ds', masterAxis: t.masterAxis.slice(), slaveAxis: t.slaveAxis.slice(), F: Array.from(t.F), offset: Array.from(t.offset), rank: t.rank };
  return {
    method: 'pds', masterAxis: t.masterAxis.slice(), slaveAxis: t.slaveAxis.slice(), window: t.window,
    start: Array.from(t.start), length: Array.from(t.length), coef: Array.from(t.coef), offset: Array.from(t.offset), ranks: Array.from(t.ranks),
  };
}

/** Rebuild a transform from its stored form, checking that its parts fit together. */
export function standardisationFromJSON(json: unknown): Standardisation {
  const r = standardisationJsonSchema.safeParse(json);
  if (!r.success) {
    const i = r.error.issues[0]!;
    throw new RangeError(`calibration transfer: stored transform ${i.path.join('.') || '(root)'}: ${i.message}`);
  }
  const j = r.data;
  const p1 = j.masterAxis.length;
  const p2 = j.slaveAxis.length;
  if (j.offset.length !== p1) throw new RangeError(`calibration transfer: stored offset has ${j.offset.length} values, the master axis ${p1}`);
  if (j.method === 'ds') {
    if (j.F.length !== p1 * p2) throw new RangeError(`calibration transfer: stored DS matrix has ${j.F.length} values, not ${p2} × ${p1}`);
    return { method: 'ds', masterAxis: j.masterAxis, slaveAxis: j.slaveAxis, F: Float64Array.from(j.F), offset: Float64Array.from(j.offset), rank: j.rank };
  }
  if (j.start.length !== p1 || j.length.length !== p1 || j.ranks.length !== p1) throw new RangeError(`calibration transfer: stored PDS windows do not cover the ${p1} master wavelengths`);
  let total = 0;
  for (let k = 0; k < p1; k++) {
    if (j.start[k]! + j.length[k]! > p2) throw new RangeError(`calibration transfer: stored PDS window ${k} runs past the ${p2} slave pixels`);
    total += j.length[k]!;
  }
  if (j.coef.length !== total) throw new RangeError(`calibration transfer: stored PDS coefficients: ${j.coef.length} values, the windows need ${total}`);
  return {
    method: 'pds', masterAxis: j.masterAxis, slaveAxis: j.slaveAxis, window: j.window,
    start: Int32Array.from(j.start), length: Int32Array.from(j.length), coef: Float64Array.from(j.coef), offset: Float64Array.from(j.offset), ranks: Int32Array.from(j.ranks),
  };
}

/**
 * The model's chain behind the transform: input axis = the new analyzer's, output = the chain's.
 * `toJSON` gives the inner chain's own JSON (the transform is stored beside it in the model file).
 * `apply` allocates nothing when `out` is given.
 */
export function transferredChain(inner: FittedChain, t: Standardisation): FittedChain {
  const ia = inner.inputAxis;
  if (ia.length !== t.masterAxis.length || t.masterAxis.some((v, k) => Math.abs(v - ia[k]!) > 1e-9)) {
    throw new RangeError(`calibration transfer: the transform maps onto a ${t.masterAxis.length}-point axis (${t.masterAxis[0]}–${t.masterAxis[t.masterAxis.length - 1]} nm), the model's chain reads a ${ia.length}-point axis (${ia[0]}–${ia[ia.length - 1]} nm)`);
  }
  const inputAxis = Float64Array.from(t.slaveAxis);
  const nIn = inputAxis.length;
  const nOut = inner.outputAxis.length;
  const mid = new Float64Array(ia.length);
  const chain: FittedChain = {
    spec: inner.spec,
    inputAxis,
    outputAxis: inner.outputAxis,
    apply(raw, out) {
      if (raw.length !== nIn) throw new RangeError(`preprocessing: the spectrum has ${raw.length} values; the chain expects ${nIn} (the new analyzer's axis, before calibration transfer)`);
      for (let j = 0; j < nIn; j++) {
        const v = raw[j]!;
        if (v - v !== 0) throw new RangeError(`preprocessing: raw value ${j} (${inputAxis[j]} nm) is ${v}; spectra must hold finite numbers`);
      }
      applyStandardisation(t, raw, mid);
      return inner.apply(mid, out);
    },
    applyMatrix(raw: DenseMatrix): DenseMatrix {
      if (raw.cols !== nIn) throw new RangeError(`preprocessing: the matrix has ${raw.cols} columns; the chain expects ${nIn}`);
      const out = denseMatrix(raw.rows, nOut);
      for (let r = 0; r < raw.rows; r++) chain.apply(raw.data.subarray(r * nIn, (r + 1) * nIn), out.data.subarray(r * nOut, (r + 1) * nOut));
      return out;
    },
    toJSON(): FittedChainJson {
      return inner.toJSON();
    },
  };
  return chain;
}

/** A property model's predict behind the transform (same shape: predict(raw) and toJSON). */
export function transferredPredictor<P extends { predict(raw: ArrayLike<number>): R; toJSON(): unknown }, R>(inner: P, t: Standardisation): P {
  const mid = new Float64Array(t.masterAxis.length);
  const p2 = t.slaveAxis.length;
  return {
    ...inner,
    predict(raw: ArrayLike<number>): R {
      if (raw.length !== p2) throw new RangeError(`property model: the spectrum has ${raw.length} values; the new analyzer's axis ${p2}`);
      applyStandardisation(t, raw, mid);
      return inner.predict(mid);
    },
    toJSON: () => inner.toJSON(),
  };
}
