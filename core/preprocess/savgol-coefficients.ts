/**
 * Savitzky–Golay coefficients (Savitzky & Golay 1964, Anal. Chem. 36:1627; table corrections by
 * Steinier, Termonia & Deltour 1972, Anal. Chem. 44:1906).
 *
 * A polynomial of degree `polyorder` is fitted by least squares to `window` equally spaced points;
 * the d-th derivative of that polynomial at position `pos` of the window is a fixed linear
 * combination of the points. We solve the least-squares problem by a QR factorisation
 * (modified Gram–Schmidt, applied twice) of the Vandermonde matrix on a centred, scaled abscissa
 * u ∈ [−1, 1], which keeps it well conditioned for long windows and high orders.
 *
 * Coefficients are per sample step; divide by Δλ^d for a real wavelength step.
 */

/** Pseudo-inverse rows P (k = 0…polyorder, each of length window): polynomial coefficient c_k = P_k · x. */
function vandermondePinv(window: number, polyorder: number, half: number, s: number): Float64Array[] {
  const m = polyorder + 1;
  // Columns q_k of A (A[j][k] = u_j^k), orthonormalised; R upper triangular with A = Q R.
  const q: Float64Array[] = [];
  const R = Array.from({ length: m }, () => new Float64Array(m));
  for (let k = 0; k < m; k++) {
    const v = new Float64Array(window);
    for (let j = 0; j < window; j++) v[j] = ((j - half) / s) ** k;
    for (let pass = 0; pass < 2; pass++) {
      for (let l = 0; l < k; l++) {
        const ql = q[l]!;
        let dot = 0;
        for (let j = 0; j < window; j++) dot += ql[j]! * v[j]!;
        R[l]![k]! += dot;
        for (let j = 0; j < window; j++) v[j]! -= dot * ql[j]!;
      }
    }
    let norm = 0;
    for (let j = 0; j < window; j++) norm += v[j]! * v[j]!;
    norm = Math.sqrt(norm);
    R[k]![k] = norm;
    for (let j = 0; j < window; j++) v[j]! /= norm;
    q.push(v);
  }
  // P = R⁻¹ Qᵀ: back substitution row by row from the bottom.
  const P: Float64Array[] = new Array(m);
  for (let k = m - 1; k >= 0; k--) {
    const row = new Float64Array(window);
    for (let j = 0; j < window; j++) {
      let val = q[k]![j]!;
      for (let l = k + 1; l < m; l++) val -= R[k]![l]! * P[l]![j]!;
      row[j] = val / R[k]![k]!;
    }
    P[k] = row;
  }
  return P;
}

/**
 * Coefficients h for every position of the window: row `pos` (0…window−1) gives the estimate of
 * the d-th derivative (per sample step) at point `pos` as Σ_j h[pos·window + j]·x[j].
 * Row (window−1)/2 is the classic centred filter; the other rows serve the spectrum ends.
 */
export function savgolAllPositions(window: number, polyorder: number, deriv: number): Float64Array {
  if (!Number.isInteger(window) || window < 1 || window % 2 !== 1) throw new RangeError(`savgol window must be a positive odd integer; got ${window}`);
  if (!Number.isInteger(polyorder) || polyorder < 0 || polyorder >= window) throw new RangeError(`savgol polyorder must be an integer in [0, window); got ${polyorder}`);
  if (!Number.isInteger(deriv) || deriv < 0 || deriv > polyorder) throw new RangeError(`savgol deriv must be an integer in [0, polyorder]; got ${deriv}`);
  const half = (window - 1) / 2;
  const s = Math.max(half, 1);
  const P = vandermondePinv(window, polyorder, half, s);
  const out = new Float64Array(window * window);
  const sd = s ** deriv;
  for (let pos = 0; pos < window; pos++) {
    const u0 = (pos - half) / s;
    for (let k = deriv; k <= polyorder; k++) {
      // d^d/du^d u^k at u0 = k!/(k−d)! u0^(k−d)
      let f = 1;
      for (let t = 0; t < deriv; t++) f *= k - t;
      const w = (f * u0 ** (k - deriv)) / sd;
      const Pk = P[k]!;
      for (let j = 0; j < window; j++) out[pos * window + j]! += w * Pk[j]!;
    }
  }
  return out;
}

/** The centred filter: coefficients for i = −m…m (scipy `savgol_coeffs(window, polyorder, deriv, use='dot')`). */
export function savgolCoefficients(window: number, polyorder: number, deriv: number): Float64Array {
  const all = savgolAllPositions(window, polyorder, deriv);
  const half = (window - 1) / 2;
  return all.slice(half * window, (half + 1) * window);
}
