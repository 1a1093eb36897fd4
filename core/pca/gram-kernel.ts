/**
 * Blocked Gram accumulation in Float64: the one hot loop of the PCA fit.
 *
 * accumulateRowGram(M, rows, len, G, ld) adds M·Mᵀ to the upper triangle (and the small diagonal
 * blocks) of G, where M holds `rows` rows of length `len` (row-major, row stride len) and G has
 * leading dimension ld. Rows are taken four against four (a 4 × 4 register tile: sixteen
 * accumulators, eight loads per sixteen multiply–adds; measured 6–12 % faster than 4 × 2 on the
 * bench machine). `rows` must be a multiple of 4 (callers pad with zero rows). Only entries G[j][k]
 * with k ≥ j − 3 are written; symmetrize afterwards.
 * With `stride` > len the rows are the first `len` entries of rows `stride` apart (column blocks).
 */
export function accumulateRowGram(M: Float64Array, rows: number, len: number, G: Float64Array, ld: number, stride = len): void {
  for (let j = 0; j < rows; j += 4) {
    const a0 = j * stride, a1 = a0 + stride, a2 = a1 + stride, a3 = a2 + stride;
    for (let k = j; k < rows; k += 4) {
      const c0 = k * stride, c1 = c0 + stride, c2 = c1 + stride, c3 = c2 + stride;
      let s00 = 0, s01 = 0, s02 = 0, s03 = 0, s10 = 0, s11 = 0, s12 = 0, s13 = 0;
      let s20 = 0, s21 = 0, s22 = 0, s23 = 0, s30 = 0, s31 = 0, s32 = 0, s33 = 0;
      for (let r = 0; r < len; r++) {
        const x0 = M[a0 + r]!, x1 = M[a1 + r]!, x2 = M[a2 + r]!, x3 = M[a3 + r]!;
        const y0 = M[c0 + r]!, y1 = M[c1 + r]!, y2 = M[c2 + r]!, y3 = M[c3 + r]!;
        s00 += x0 * y0; s01 += x0 * y1; s02 += x0 * y2; s03 += x0 * y3;
        s10 += x1 * y0; s11 += x1 * y1; s12 += x1 * y2; s13 += x1 * y3;
        s20 += x2 * y0; s21 += x2 * y1; s22 += x2 * y2; s23 += x2 * y3;
        s30 += x3 * y0; s31 += x3 * y1; s32 += x3 * y2; s33 += x3 * y3;
      }
      let g = j * ld + k;
      G[g] += s00; G[g + 1] += s01; G[g + 2] += s02; G[g + 3] += s03; g += ld;
      G[g] += s10; G[g + 1] += s11; G[g + 2] += s12; G[g + 3] += s13; g += ld;
      G[g] += s20; G[g + 1] += s21; G[g + 2] += s22; G[g + 3] += s23; g += ld;
      G[g] += s30; G[g + 1] += s31; G[g + 2] += s32; G[g + 3] += s33;
    }
  }
}

/** Copy the upper triangle of a padded ld × ld accumulator into a full symmetric d × d matrix. */
export function symmetrizeUpper(Gp: Float64Array, ld: number, d: number): Float64Array {
  const G = new Float64Array(d * d);
  for (let j = 0; j < d; j++) {
    for (let k = j; k < d; k++) {
      const v = Gp[j * ld + k]!;
      G[j * d + k] = v;
      G[k * d + j] = v;
    }
  }
  return G;
}

export const roundUp4 = (v: number): number => (v + 3) & ~3;

/** Scatter panel height: rows of X taken per transposed panel (measured best on x86-64, bench/). */
export const PANEL_ROWS = 64;

/**
 * Scatter matrix Σ_i (x_i − c)(x_i − c)ᵀ (p × p) over the selected rows of X (n × p, row-major),
 * with c a centre vector (zeros for none). Rows: all when `rowIndex` is omitted.
 */
export function scatterMatrix(
  X: Float64Array,
  n: number,
  p: number,
  centre: Float64Array,
  rowIndex?: ArrayLike<number>,
): Float64Array {
  const pp = roundUp4(p);
  const B = PANEL_ROWS;
  const Gp = new Float64Array(pp * pp);
  const T = new Float64Array(pp * B); // panel of (X − c)ᵀ: pp × B, zero padded
  const count = rowIndex ? rowIndex.length : n;
  for (let i0 = 0; i0 < count; i0 += B) {
    const b = Math.min(B, count - i0);
    for (let r = 0; r < b; r++) {
      const i = rowIndex ? rowIndex[i0 + r]! : i0 + r;
      const off = i * p;
      for (let j = 0; j < p; j++) T[j * B + r] = X[off + j]! - centre[j]!;
    }
    if (b < B) for (let j = 0; j < p; j++) for (let r = b; r < B; r++) T[j * B + r] = 0;
    accumulateRowGram(T, pp, B, Gp, pp);
  }
  return symmetrizeUpper(Gp, pp, p);
}

/** Row Gram (X − 1cᵀ)(X − 1cᵀ)ᵀ (n × n), for p > n. Also returns the centred copy of X. */
export function rowGramMatrix(X: Float64Array, n: number, p: number, centre: Float64Array): { K: Float64Array; Xc: Float64Array } {
  const nn = roundUp4(n);
  const Xc = new Float64Array(nn * p);
  for (let i = 0; i < n; i++) for (let j = 0; j < p; j++) Xc[i * p + j] = X[i * p + j]! - centre[j]!;
  const Kp = new Float64Array(nn * nn);
  accumulateRowGram(Xc, nn, p, Kp, nn);
  return { K: symmetrizeUpper(Kp, nn, n), Xc: Xc.subarray(0, n * p) };
}
