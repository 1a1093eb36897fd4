/** Seeded low-rank-plus-noise data for the PCA tests (own construction, core/stats PRNG). */
import { denseMatrix, type DenseMatrix } from '../../core/linalg/dense-matrix.ts';
import { createPrng } from '../../core/stats/prng.ts';

/**
 * n × p rows x = offset + Σ_a s_a·sd_a·l_a + noise·ε, with fixed random directions l_a (unit norm),
 * s, ε standard normal. Returns the directions too.
 */
export function lowRankData(
  n: number,
  p: number,
  sds: number[],
  noise: number,
  seed: number,
  offset = 5,
): { X: DenseMatrix; directions: Float64Array[] } {
  const rng = createPrng(seed);
  const directions = sds.map(() => {
    const l = new Float64Array(p);
    let s = 0;
    for (let j = 0; j < p; j++) { l[j] = rng.normal(); s += l[j]! * l[j]!; }
    for (let j = 0; j < p; j++) l[j] /= Math.sqrt(s);
    return l;
  });
  return { X: sampleRows(n, p, directions, sds, noise, rng.next() * 2 ** 31, offset), directions };
}

export function sampleRows(n: number, p: number, directions: Float64Array[], sds: number[], noise: number, seed: number, offset = 5): DenseMatrix {
  const rng = createPrng(seed);
  const X = denseMatrix(n, p);
  for (let i = 0; i < n; i++) {
    const off = i * p;
    for (let a = 0; a < directions.length; a++) {
      const s = rng.normal() * sds[a]!;
      const l = directions[a]!;
      for (let j = 0; j < p; j++) X.data[off + j] += s * l[j]!;
    }
    for (let j = 0; j < p; j++) X.data[off + j] += noise * rng.normal() + offset;
  }
  return X;
}
