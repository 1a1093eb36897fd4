/** Linear interpolation onto a new axis (nm); refuses points outside the measured axis. */

/**
 * `points` evenly spaced wavelengths from the first to the last of `axis` (the two ends exactly as
 * given, so nothing is extrapolated).
 */
export function evenGrid(axis: ArrayLike<number>, points: number): number[] {
  const n = axis.length;
  if (n < 2 || points < 2) return Array.from(axis);
  const lo = axis[0]!;
  const hi = axis[n - 1]!;
  const step = (hi - lo) / (points - 1);
  const out = Array.from({ length: points }, (_, k) => lo + k * step);
  out[points - 1] = hi;
  return out;
}
import { PreprocessSpecError } from '../spec.ts';
import type { Stage } from '../stage.ts';

export function compileResample(index: number, target: number[], axis: Float64Array): Stage {
  const n = axis.length;
  if (n < 2) throw new PreprocessSpecError(index, 'resample', null, `needs at least 2 wavelengths entering the step; got ${n}`);
  for (let j = 1; j < n; j++) {
    if (!(axis[j]! > axis[j - 1]!)) throw new PreprocessSpecError(index, 'resample', null, `the axis entering this step must increase strictly; value ${j} (${axis[j]} nm) does not`);
  }
  const lo = axis[0]!;
  const hi = axis[n - 1]!;
  const m = target.length;
  const left = new Int32Array(m);
  const frac = new Float64Array(m);
  let j = 0;
  for (let k = 0; k < m; k++) {
    const x = target[k]!;
    if (x < lo || x > hi) {
      throw new PreprocessSpecError(index, 'resample', 'axis', `${x} nm lies outside the axis entering this step (${lo}–${hi} nm); extrapolation is refused`);
    }
    while (j < n - 2 && axis[j + 1]! < x) j++;
    // x in [axis[j], axis[j+1]]
    left[k] = j;
    frac[k] = (x - axis[j]!) / (axis[j + 1]! - axis[j]!);
  }
  return {
    inLength: n,
    outLength: m,
    outAxis: Float64Array.from(target),
    fitted: null,
    apply(src, dst) {
      for (let k = 0; k < m; k++) {
        const i = left[k]!;
        const f = frac[k]!;
        const a = src[i]!;
        dst[k] = f === 0 ? a : a + f * (src[i + 1]! - a);
      }
    },
  };
}
