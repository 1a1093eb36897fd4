/**
 * Column centring and scaling with centre and scale learned on the calibration set:
 * none, unit variance (uv, 1/sd) or Pareto (1/√sd); sd with the n−1 denominator.
 */
import { PreprocessSpecError } from '../spec.ts';
import type { Stage } from '../stage.ts';

export function scaleStateFromCalibration(
  index: number,
  center: boolean,
  scaling: 'none' | 'uv' | 'pareto',
  data: Float64Array,
  rows: number,
  axis: Float64Array,
): { center: number[] | null; scale: number[] | null } {
  const cols = axis.length;
  if (rows < 1 || (scaling !== 'none' && rows < 2)) {
    throw new PreprocessSpecError(index, 'scale', 'scaling', `needs at least ${scaling === 'none' ? 1 : 2} calibration spectra; got ${rows}`);
  }
  const mean = new Float64Array(cols);
  for (let i = 0; i < rows; i++) for (let j = 0; j < cols; j++) mean[j]! += data[i * cols + j]!;
  for (let j = 0; j < cols; j++) mean[j]! /= rows;
  let scale: number[] | null = null;
  if (scaling !== 'none') {
    const ss = new Float64Array(cols);
    for (let i = 0; i < rows; i++) {
      for (let j = 0; j < cols; j++) {
        const d = data[i * cols + j]! - mean[j]!;
        ss[j]! += d * d;
      }
    }
    scale = new Array(cols);
    for (let j = 0; j < cols; j++) {
      const sd = Math.sqrt(ss[j]! / (rows - 1));
      if (!(sd > 0)) {
        throw new PreprocessSpecError(index, 'scale', 'scaling', `the variable at ${axis[j]} nm has zero standard deviation in the calibration set; exclude it or use scaling 'none'`);
      }
      scale[j] = scaling === 'uv' ? 1 / sd : 1 / Math.sqrt(sd);
    }
  }
  return { center: center ? Array.from(mean) : null, scale };
}

/** `scale` holds the multipliers (1/sd or 1/√sd), stored so apply() only multiplies. */
export function compileScale(index: number, axis: Float64Array, state: { center: number[] | null; scale: number[] | null }): Stage {
  const n = axis.length;
  if (state.center && state.center.length !== n) throw new PreprocessSpecError(index, 'scale', 'center', `stored centre has ${state.center.length} values; the axis entering the step has ${n}`);
  if (state.scale && state.scale.length !== n) throw new PreprocessSpecError(index, 'scale', 'scaling', `stored scale has ${state.scale.length} values; the axis entering the step has ${n}`);
  const c = state.center ? Float64Array.from(state.center) : new Float64Array(n);
  const s = state.scale ? Float64Array.from(state.scale) : new Float64Array(n).fill(1);
  return {
    inLength: n,
    outLength: n,
    outAxis: axis,
    fitted: { center: state.center ? Array.from(c) : null, scale: state.scale ? Array.from(s) : null },
    apply(src, dst) {
      for (let j = 0; j < n; j++) dst[j] = (src[j]! - c[j]!) * s[j]!;
    },
  };
}
