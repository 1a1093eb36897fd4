/**
 * θ_i = Σ over discarded components of λ_j^i, computed as trace(R^i) of the residual covariance
 * R = C − Σ_a λ_a v_a v_aᵀ (no full eigendecomposition needed; Jackson & Mudholkar 1979).
 * R is d × d (d = p, or n when the row Gram was used: the nonzero spectrum is the same).
 */
import { accumulateRowGram, roundUp4 } from './gram-kernel.ts';

export function residualTheta(
  C: Float64Array,
  d: number,
  values: Float64Array,
  vectors: Float64Array,
  k: number,
): [number, number, number] {
  const dd = roundUp4(d);
  const R = new Float64Array(dd * d);
  for (let i = 0; i < d; i++) {
    for (let j = 0; j < d; j++) {
      let s = C[i * d + j]!;
      for (let a = 0; a < k; a++) s -= values[a]! * vectors[i * k + a]! * vectors[j * k + a]!;
      R[i * d + j] = s;
    }
  }
  let t1 = 0;
  let t2 = 0;
  for (let i = 0; i < d; i++) t1 += R[i * d + i]!;
  for (let i = 0; i < d * d; i++) t2 += R[i]! * R[i]!;
  // R² = R·Rᵀ (R symmetric), upper triangle by the blocked kernel; trace(R³) = Σ_ij R_ij (R²)_ij.
  // Column blocks of 128 keep the six rows of a tile in L1 cache.
  const R2 = new Float64Array(dd * dd);
  for (let c0 = 0; c0 < d; c0 += 128) accumulateRowGram(R.subarray(c0), dd, Math.min(128, d - c0), R2, dd, d);
  let t3 = 0;
  for (let i = 0; i < d; i++) {
    t3 += R[i * d + i]! * R2[i * dd + i]!;
    let off = 0;
    for (let j = i + 1; j < d; j++) off += R[i * d + j]! * R2[i * dd + j]!;
    t3 += 2 * off;
  }
  return [t1, t2, t3];
}
