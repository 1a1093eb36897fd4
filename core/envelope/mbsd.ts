/**
 * Moving-block standard deviation (Sekulic, Ward, Brannegan, Stanley, Evans, Sciavolino, Hailey &
 * Aldridge 1996, Anal. Chem. 68:509; definition as recalled from memory): the standard deviation
 * (n − 1 denominator) across each block of `block` consecutive spectra at every wavelength,
 * averaged over wavelengths. A small value means the spectra have stopped changing (blend
 * homogeneity, end of drying).
 */

/** MBSD of every complete block: length N − block + 1. */
export function movingBlockSd(spectra: ArrayLike<ArrayLike<number>>, block: number): Float64Array {
  if (!Number.isInteger(block) || block < 2) throw new RangeError(`MBSD block must be an integer ≥ 2 (got ${block})`);
  const n = spectra.length;
  if (n < block) return new Float64Array(0);
  const p = spectra[0].length;
  const out = new Float64Array(n - block + 1);
  for (let s = 0; s + block <= n; s++) {
    let acc = 0;
    for (let j = 0; j < p; j++) {
      let mean = 0;
      for (let b = 0; b < block; b++) mean += spectra[s + b][j];
      mean /= block;
      let ss = 0;
      for (let b = 0; b < block; b++) {
        const d = spectra[s + b][j] - mean;
        ss += d * d;
      }
      acc += Math.sqrt(ss / (block - 1));
    }
    out[s] = acc / p;
  }
  return out;
}

/**
 * Streaming MBSD over the last `block` spectra: a ring buffer preallocated at creation, no
 * allocation per push. `push` returns the MBSD once `block` spectra have arrived, else null.
 */
export class MovingBlockSd {
  private readonly ring: Float64Array;
  private count = 0;
  private next = 0;
  constructor(readonly block: number, readonly p: number) {
    if (!Number.isInteger(block) || block < 2) throw new RangeError(`MBSD block must be an integer ≥ 2 (got ${block})`);
    this.ring = new Float64Array(block * p);
  }
  push(x: ArrayLike<number>): number | null {
    const { p, block, ring } = this;
    const off = this.next * p;
    for (let j = 0; j < p; j++) ring[off + j] = x[j];
    this.next = (this.next + 1) % block;
    if (this.count < block) this.count++;
    if (this.count < block) return null;
    let acc = 0;
    for (let j = 0; j < p; j++) {
      let mean = 0;
      for (let b = 0; b < block; b++) mean += ring[b * p + j];
      mean /= block;
      let ss = 0;
      for (let b = 0; b < block; b++) {
        const d = ring[b * p + j] - mean;
        ss += d * d;
      }
      acc += Math.sqrt(ss / (block - 1));
    }
    return acc / p;
  }
  reset(): void {
    this.count = 0;
    this.next = 0;
  }
}
