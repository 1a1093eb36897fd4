/**
 * Multiplicative scatter correction (Geladi, MacDougall & Martens 1985, Appl. Spectrosc. 39:491):
 * regress each spectrum on the reference (the calibration mean, stored at fit), x ≈ a + b·ref,
 * and return (x − a)/b.
 */
import { PreprocessSpecError } from '../spec.ts';
import type { Stage } from '../stage.ts';
import { SpectrumRefusedError } from './snv.ts';

export function mscReferenceFromCalibration(data: Float64Array, rows: number, cols: number): number[] {
  const ref = new Float64Array(cols);
  for (let i = 0; i < rows; i++) for (let j = 0; j < cols; j++) ref[j]! += data[i * cols + j]!;
  for (let j = 0; j < cols; j++) ref[j]! /= rows;
  return Array.from(ref);
}

export function compileMsc(index: number, axis: Float64Array, reference: number[]): Stage {
  const n = axis.length;
  if (reference.length !== n) throw new PreprocessSpecError(index, 'msc', null, `stored reference has ${reference.length} values; the axis entering the step has ${n}`);
  const ref = Float64Array.from(reference);
  let rsum = 0;
  for (let j = 0; j < n; j++) rsum += ref[j]!;
  const rmean = rsum / n;
  const rc = new Float64Array(n);
  let rss = 0;
  for (let j = 0; j < n; j++) {
    rc[j] = ref[j]! - rmean;
    rss += rc[j]! * rc[j]!;
  }
  if (!(rss > 0)) throw new PreprocessSpecError(index, 'msc', null, 'the reference spectrum (calibration mean) is flat; MSC is undefined');
  return {
    inLength: n,
    outLength: n,
    outAxis: axis,
    fitted: { reference: Array.from(ref) },
    apply(src, dst) {
      let sum = 0;
      for (let j = 0; j < n; j++) sum += src[j]!;
      const xmean = sum / n;
      let sxy = 0;
      for (let j = 0; j < n; j++) sxy += rc[j]! * (src[j]! - xmean);
      const b = sxy / rss;
      const a = xmean - b * rmean;
      if (!(b !== 0 && Number.isFinite(b))) {
        throw new SpectrumRefusedError(index, 'msc', b === 0 ? 'the spectrum has no slope against the reference (b = 0); MSC is undefined' : 'the spectrum holds NaN or Infinity');
      }
      const inv = 1 / b;
      for (let j = 0; j < n; j++) dst[j] = (src[j]! - a) * inv;
    },
  };
}
