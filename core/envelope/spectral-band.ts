/**
 * The golden band of whole spectra at one point of progress: each reference batch gives one mean
 * spectrum (the average of its spectra near that progress), and the band per wavelength is the mean
 * of those batch means ± k·s, s the standard deviation between batches (n − 1 denominator) — the
 * same construction as the score envelope (Nomikos & MacGregor 1995, Technometrics 37:41), applied
 * wavelength by wavelength so a spectrum can be read against the golden batches.
 */

export interface SpectralBand {
  mean: Float64Array;
  sd: Float64Array;
  lower: Float64Array;
  upper: Float64Array;
  /** Batches the band was computed from. */
  batches: number;
}

/** Average of several spectra of one batch (same axis). */
export function meanSpectrum(spectra: ArrayLike<number>[]): Float64Array {
  if (spectra.length === 0) throw new RangeError('meanSpectrum: no spectra');
  const p = spectra[0].length;
  const out = new Float64Array(p);
  for (const [i, s] of spectra.entries()) {
    if (s.length !== p) throw new RangeError(`meanSpectrum: spectrum ${i} has ${s.length} values, the first ${p}`);
    for (let j = 0; j < p; j++) out[j] += s[j];
  }
  for (let j = 0; j < p; j++) out[j] /= spectra.length;
  return out;
}

/** Band over batch means: mean ± k·s per wavelength. Needs at least 2 batches. */
export function spectralBand(batchMeans: ArrayLike<number>[], k: number): SpectralBand {
  const n = batchMeans.length;
  if (n < 2) throw new RangeError(`a golden band needs at least 2 reference batches (got ${n})`);
  if (!(k > 0) || !Number.isFinite(k)) throw new RangeError(`band width k must be a finite number > 0 (got ${k})`);
  const p = batchMeans[0].length;
  const mean = new Float64Array(p);
  const sd = new Float64Array(p);
  for (const [i, s] of batchMeans.entries()) {
    if (s.length !== p) throw new RangeError(`spectralBand: batch ${i} has ${s.length} values, the first ${p}`);
    for (let j = 0; j < p; j++) mean[j] += s[j];
  }
  for (let j = 0; j < p; j++) mean[j] /= n;
  for (const s of batchMeans) for (let j = 0; j < p; j++) sd[j] += (s[j] - mean[j]) ** 2;
  const lower = new Float64Array(p);
  const upper = new Float64Array(p);
  for (let j = 0; j < p; j++) {
    sd[j] = Math.sqrt(sd[j] / (n - 1));
    lower[j] = mean[j] - k * sd[j];
    upper[j] = mean[j] + k * sd[j];
  }
  return { mean, sd, lower, upper, batches: n };
}
