/**
 * Savitzky–Golay smoothing and derivatives on an evenly spaced axis.
 *
 * Edge treatment (documented, no silent zeros): for the first and last (window−1)/2 points the
 * polynomial fitted to the first (last) full window is evaluated at those points — the same
 * treatment as scipy.signal.savgol_filter(mode='interp'). Derivatives are per nm: the per-step
 * coefficients are divided by Δλ^d, Δλ the axis step in nm. The axis entering the step must be
 * evenly spaced: each step within 0.1 % of the mean step, or within 0.01 nm of it, whichever is
 * larger — an axis written rounded to 0.01 nm (each wavelength off by up to 0.005 nm, so a step by
 * up to 0.01 nm) counts as even. Otherwise add a resample step first ({ step: 'resample', even: true }).
 */
import { PreprocessSpecError } from '../spec.ts';
import type { Stage } from '../stage.ts';
import { savgolAllPositions } from '../savgol-coefficients.ts';

/** Relative tolerance of a step against the mean step. */
export const SAVGOL_SPACING_TOLERANCE = 1e-3;
/** Absolute tolerance of a step against the mean step, nm: the rounding of an axis written to 0.01 nm. */
export const SAVGOL_SPACING_TOLERANCE_NM = 0.01;

export function compileSavgol(index: number, window: number, polyorder: number, deriv: 0 | 1 | 2, axis: Float64Array): Stage {
  const n = axis.length;
  if (window > n) throw new PreprocessSpecError(index, 'savgol', 'window', `window ${window} is longer than the ${n} variables entering the step`);
  let step = 1;
  if (n > 1) {
    step = (axis[n - 1]! - axis[0]!) / (n - 1);
    if (!(step > 0)) throw new PreprocessSpecError(index, 'savgol', null, 'the axis entering the step must increase');
    for (let j = 1; j < n; j++) {
      const d = axis[j]! - axis[j - 1]!;
      // 1e-9 nm of slack: the two rounded values' difference is itself a rounded binary number.
      if (Math.abs(d - step) > Math.max(SAVGOL_SPACING_TOLERANCE * step, SAVGOL_SPACING_TOLERANCE_NM + 1e-9)) {
        throw new PreprocessSpecError(
          index,
          'savgol',
          null,
          `the axis entering the step is not evenly spaced (step ${d} nm at ${axis[j - 1]} nm, mean ${step} nm; allowed: within ${SAVGOL_SPACING_TOLERANCE * 100} % or ${SAVGOL_SPACING_TOLERANCE_NM} nm of the mean); add { "step": "resample", "even": true } before it`,
        );
      }
    }
  }
  const w = window;
  const half = (w - 1) / 2;
  const all = savgolAllPositions(w, polyorder, deriv);
  const scale = 1 / step ** deriv;
  for (let k = 0; k < all.length; k++) all[k]! *= scale;
  // The centred filter is symmetric for even derivatives and antisymmetric for odd ones:
  // fold it, so each output costs half + 1 multiplications instead of window.
  const c0 = all[half * w + half]!;
  const sign = deriv % 2 === 0 ? 1 : -1;
  const fold = new Float64Array(half + 1);
  for (let k = 1; k <= half; k++) fold[k] = (all[half * w + half + k]! + sign * all[half * w + half - k]!) / 2;
  const odd = sign < 0;
  const tailStart = n - w; // first index of the last window
  return {
    inLength: n,
    outLength: n,
    outAxis: axis,
    fitted: null,
    apply(src, dst) {
      // Left edge: polynomial of the first window, evaluated at positions 0…half−1.
      for (let i = 0; i < half; i++) {
        const off = i * w;
        let acc = 0;
        for (let j = 0; j < w; j++) acc += all[off + j]! * src[j]!;
        dst[i] = acc;
      }
      const end = n - half;
      if (odd) {
        for (let i = half; i < end; i++) {
          let acc = 0;
          for (let k = 1; k <= half; k++) acc += fold[k]! * (src[i + k]! - src[i - k]!);
          dst[i] = acc;
        }
      } else {
        for (let i = half; i < end; i++) {
          let acc = c0 * src[i]!;
          for (let k = 1; k <= half; k++) acc += fold[k]! * (src[i + k]! + src[i - k]!);
          dst[i] = acc;
        }
      }
      // Right edge: polynomial of the last window, evaluated at positions half+1…w−1.
      for (let i = Math.max(end, half); i < n; i++) {
        const off = (i - tailStart) * w;
        let acc = 0;
        for (let j = 0; j < w; j++) acc += all[off + j]! * src[tailStart + j]!;
        dst[i] = acc;
      }
    },
  };
}
