/**
 * Dynamic time warping with the symmetric step pattern and an adjustment window (Sakoe & Chiba
 * 1978, IEEE Trans. ASSP 26:43), as used to synchronise batch trajectories (Kassidas, MacGregor &
 * Taylor 1998, AIChE J. 44:864).
 *
 * Recurrence (symmetric, slope constraint P = 0):
 *   g(i, j) = min( g(i−1, j) + d(i, j),  g(i−1, j−1) + 2·d(i, j),  g(i, j−1) + d(i, j) ),
 *   g(0, 0) = 2·d(0, 0);  normalised distance = g(n−1, m−1) / (n + m).
 * Local distance: weighted squared Euclidean d(i, j) = Σ_k w_k (a_ik − b_jk)² (Kassidas et al. use
 * a weight per variable; weights default to 1).
 * Window: cell (i, j) is allowed when |j − i·(m−1)/(n−1)| ≤ band (the Sakoe–Chiba band around the
 * scaled diagonal, so sequences of unequal length stay feasible for band ≥ 1).
 */

export interface DtwOptions {
  /** Half-width of the Sakoe–Chiba band in samples of the second sequence; Infinity = no band. */
  band?: number;
  /** Weight per variable (length = dimension). */
  weights?: ArrayLike<number>;
}

export interface DtwResult {
  /** g(n−1, m−1): the accumulated symmetric cost. */
  cost: number;
  /** cost / (n + m) (Sakoe & Chiba's normalisation for the symmetric form). */
  distance: number;
  /** Warping path from (0, 0) to (n−1, m−1): pairs [i, j]. */
  path: [number, number][];
}

/** A sequence of vectors: rows = time points. Scalars may be given as plain numbers. */
export type Sequence = ArrayLike<ArrayLike<number> | number>;

function rowOf(s: Sequence, i: number): ArrayLike<number> {
  const r = s[i];
  return typeof r === 'number' ? [r] : r;
}

function bandAllows(i: number, j: number, n: number, m: number, band: number): boolean {
  if (!Number.isFinite(band)) return true;
  const centre = n > 1 ? (i * (m - 1)) / (n - 1) : 0;
  return Math.abs(j - centre) <= band + 1e-9;
}

export function dtw(a: Sequence, b: Sequence, opts: DtwOptions = {}): DtwResult {
  const n = a.length;
  const m = b.length;
  if (n === 0 || m === 0) throw new RangeError(`DTW needs two non-empty sequences (got lengths ${n} and ${m})`);
  const band = opts.band ?? Infinity;
  if (!(band >= 0)) throw new RangeError(`DTW band must be ≥ 0 (got ${band})`);
  const dim = rowOf(a, 0).length;
  const w = opts.weights;
  if (w && w.length !== dim) throw new RangeError(`DTW weights have ${w.length} values; the sequences have ${dim} variables`);
  for (let i = 0; i < n; i++) if (rowOf(a, i).length !== dim) throw new RangeError(`DTW: row ${i} of the first sequence has ${rowOf(a, i).length} values, expected ${dim}`);
  for (let j = 0; j < m; j++) if (rowOf(b, j).length !== dim) throw new RangeError(`DTW: row ${j} of the second sequence has ${rowOf(b, j).length} values, expected ${dim}`);

  const g = new Float64Array(n * m).fill(Infinity);
  // 0 = diagonal, 1 = from (i−1, j), 2 = from (i, j−1)
  const dir = new Uint8Array(n * m);
  const local = (i: number, j: number): number => {
    const x = rowOf(a, i);
    const y = rowOf(b, j);
    let s = 0;
    for (let k = 0; k < dim; k++) {
      const d = x[k] - y[k];
      s += (w ? w[k] : 1) * d * d;
    }
    return s;
  };
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < m; j++) {
      if (!bandAllows(i, j, n, m, band)) continue;
      const d = local(i, j);
      if (i === 0 && j === 0) {
        g[0] = 2 * d;
        continue;
      }
      let best = Infinity;
      let bd = 0;
      if (i > 0 && j > 0) {
        const v = g[(i - 1) * m + j - 1] + 2 * d;
        if (v < best) { best = v; bd = 0; }
      }
      if (i > 0) {
        const v = g[(i - 1) * m + j] + d;
        if (v < best) { best = v; bd = 1; }
      }
      if (j > 0) {
        const v = g[i * m + j - 1] + d;
        if (v < best) { best = v; bd = 2; }
      }
      g[i * m + j] = best;
      dir[i * m + j] = bd;
    }
  }
  const cost = g[n * m - 1];
  if (!Number.isFinite(cost)) throw new RangeError(`DTW: no warping path fits inside a band of ${band} for lengths ${n} and ${m}`);
  const path: [number, number][] = [];
  let i = n - 1;
  let j = m - 1;
  path.push([i, j]);
  while (i > 0 || j > 0) {
    const d = dir[i * m + j];
    if (d === 0) { i--; j--; } else if (d === 1) i--; else j--;
    path.push([i, j]);
  }
  path.reverse();
  return { cost, distance: cost / (n + m), path };
}

/**
 * Map a warping path onto the reference (second) sequence's time axis: for each reference index j,
 * the mean of the test rows aligned to it (Kassidas et al. 1998 average the rows mapped to one
 * reference point). Returns rows of length dim, one per reference point.
 */
export function alignToReference(a: Sequence, path: [number, number][], m: number): Float64Array[] {
  const dim = rowOf(a, 0).length;
  const sums = Array.from({ length: m }, () => new Float64Array(dim));
  const counts = new Uint32Array(m);
  for (const [i, j] of path) {
    const x = rowOf(a, i);
    const s = sums[j];
    for (let k = 0; k < dim; k++) s[k] += x[k];
    counts[j]++;
  }
  for (let j = 0; j < m; j++) {
    const c = counts[j];
    if (c > 0) for (let k = 0; k < dim; k++) sums[j][k] /= c;
  }
  return sums;
}
