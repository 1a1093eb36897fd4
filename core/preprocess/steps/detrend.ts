/**
 * Polynomial detrend (Barnes, Dhanoa & Lister 1989): subtract the least-squares polynomial of the
 * given order in wavelength. The projection onto the polynomials is precomputed as an orthonormal
 * basis (modified Gram–Schmidt, twice) on a centred, scaled wavelength, so apply() costs
 * (order+1) dot products and no allocation.
 */
import { PreprocessSpecError } from '../spec.ts';
import type { Stage } from '../stage.ts';

export function compileDetrend(index: number, order: number, axis: Float64Array): Stage {
  const n = axis.length;
  const m = order + 1;
  if (m > n) throw new PreprocessSpecError(index, 'detrend', 'order', `order ${order} needs at least ${m} variables; the axis entering the step has ${n}`);
  let lo = Infinity;
  let hi = -Infinity;
  for (let j = 0; j < n; j++) {
    lo = Math.min(lo, axis[j]!);
    hi = Math.max(hi, axis[j]!);
  }
  const mid = (lo + hi) / 2;
  const half = hi > lo ? (hi - lo) / 2 : 1;
  const basis = new Float64Array(m * n); // row k = k-th orthonormal vector
  for (let k = 0; k < m; k++) {
    const v = basis.subarray(k * n, (k + 1) * n);
    for (let j = 0; j < n; j++) v[j] = ((axis[j]! - mid) / half) ** k;
    for (let pass = 0; pass < 2; pass++) {
      for (let l = 0; l < k; l++) {
        const q = basis.subarray(l * n, (l + 1) * n);
        let dot = 0;
        for (let j = 0; j < n; j++) dot += q[j]! * v[j]!;
        for (let j = 0; j < n; j++) v[j]! -= dot * q[j]!;
      }
    }
    let norm = 0;
    for (let j = 0; j < n; j++) norm += v[j]! * v[j]!;
    norm = Math.sqrt(norm);
    if (!(norm > 1e-10 * Math.sqrt(n))) throw new PreprocessSpecError(index, 'detrend', 'order', `order ${order} is too high for the ${n} distinct wavelengths entering the step`);
    for (let j = 0; j < n; j++) v[j]! /= norm;
  }
  return {
    inLength: n,
    outLength: n,
    outAxis: axis,
    fitted: null,
    apply(src, dst) {
      for (let j = 0; j < n; j++) dst[j] = src[j]!;
      for (let k = 0; k < m; k++) {
        const off = k * n;
        let dot = 0;
        for (let j = 0; j < n; j++) dot += basis[off + j]! * src[j]!;
        for (let j = 0; j < n; j++) dst[j]! -= dot * basis[off + j]!;
      }
    },
  };
}
