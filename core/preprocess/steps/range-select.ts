/** Keep (select) or drop (exclude) wavelength ranges given in nm; ends inclusive. */
import { PreprocessSpecError } from '../spec.ts';
import type { Stage } from '../stage.ts';

export function compileRangeStep(index: number, step: 'select' | 'exclude', ranges: [number, number][], axis: Float64Array): Stage {
  const inRange = (x: number): boolean => ranges.some(([a, b]) => x >= a && x <= b);
  ranges.forEach(([a, b], k) => {
    if (!axis.some((x) => x >= a && x <= b)) {
      throw new PreprocessSpecError(index, step, 'ranges', `range ${k} [${a}, ${b}] nm holds no wavelength of the axis (${axis[0]}–${axis[axis.length - 1]} nm)`);
    }
  });
  const keep: number[] = [];
  for (let j = 0; j < axis.length; j++) if (inRange(axis[j]!) === (step === 'select')) keep.push(j);
  if (keep.length === 0) throw new PreprocessSpecError(index, step, 'ranges', 'leaves no wavelength');
  const idx = Int32Array.from(keep);
  const outAxis = Float64Array.from(keep, (j) => axis[j]!);
  const n = idx.length;
  return {
    inLength: axis.length,
    outLength: n,
    outAxis,
    fitted: null,
    apply(src, dst) {
      for (let k = 0; k < n; k++) dst[k] = src[idx[k]!]!;
    },
  };
}
