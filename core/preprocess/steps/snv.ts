/**
 * Standard normal variate (Barnes, Dhanoa & Lister 1989, Appl. Spectrosc. 43:772): each spectrum
 * minus its own mean, divided by its own standard deviation with the n−1 denominator.
 */
import { PreprocessSpecError } from '../spec.ts';
import type { Stage } from '../stage.ts';

/** Thrown by apply when one spectrum cannot be corrected (flat, or holding NaN/Infinity). */
export class SpectrumRefusedError extends Error {
  constructor(index: number, step: string, detail: string) {
    super(`preprocessing steps[${index}] (${step}): ${detail}`);
    this.name = 'SpectrumRefusedError';
  }
}

export function compileSnv(index: number, axis: Float64Array): Stage {
  const n = axis.length;
  if (n < 2) throw new PreprocessSpecError(index, 'snv', null, `needs at least 2 variables; got ${n}`);
  return {
    inLength: n,
    outLength: n,
    outAxis: axis,
    fitted: null,
    apply(src, dst) {
      let sum = 0;
      for (let j = 0; j < n; j++) sum += src[j]!;
      const mean = sum / n;
      let ss = 0;
      for (let j = 0; j < n; j++) {
        const d = src[j]! - mean;
        ss += d * d;
      }
      const sd = Math.sqrt(ss / (n - 1));
      if (!(sd > 0)) {
        throw new SpectrumRefusedError(index, 'snv', sd === 0 ? 'the spectrum has zero standard deviation (flat input); SNV is undefined' : 'the spectrum holds NaN or Infinity');
      }
      const inv = 1 / sd;
      for (let j = 0; j < n; j++) dst[j] = (src[j]! - mean) * inv;
    },
  };
}
