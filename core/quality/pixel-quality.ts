/**
 * Per-spectrum pixel quality, judged on the raw spectrum as the analyzer sent it, before any
 * preprocessing. Each bad pixel carries one or more named flags:
 *
 * - 'non-finite': NaN or ±Infinity.
 * - 'saturated': at or beyond the analyzer's saturation level when one is configured (absorbance
 *   where the detector sees no usable light), or part of a clipped run — `clipRun` or more adjacent
 *   pixels holding exactly the spectrum's largest (or smallest) value, the flat top a detector or
 *   converter at its limit draws.
 * - 'dead': the pixel reads exactly the dead value (0 by default: a detector element that returns
 *   no signal is reported as 0 by most array spectrometers; common practice, no source).
 * - 'stuck': the pixel repeats its value (within `stuckTolerance`) over `stuckSpectra` consecutive
 *   spectra of the analyzer's recent history while most pixels change (so a resent spectrum is not
 *   read as stuck pixels).
 * - 'spike': a single-pixel spike: the second difference x_j − (x_{j−1} + x_{j+1})/2 beyond
 *   `spikeK` robust standard deviations of the second differences of the whole spectrum
 *   (1.4826 · median |d|, the MAD scale of a zero-centred normal; Hampel 1974, JASA 69:383) and
 *   above the absolute floor `spikeFloor`, a local extreme whose neighbours' second differences
 *   have the opposite sign (the −½, 1, −½ footprint of one raised pixel). End pixels are not
 *   judged for spikes.
 *
 * The checker keeps its history and work buffers from creation; check() allocates nothing and
 * returns the same object each call (copy what you keep). Deterministic.
 */

export const PIXEL_FLAGS = ['non-finite', 'saturated', 'dead', 'stuck', 'spike'] as const;
export type PixelFlag = (typeof PIXEL_FLAGS)[number];

/** Bit of each flag in PixelQuality.mask. */
export const PIXEL_FLAG_BIT: Record<PixelFlag, number> = { 'non-finite': 1, saturated: 2, dead: 4, stuck: 8, spike: 16 };

export interface PixelQualitySettings {
  /** Values at or above this are saturated (spectrum units); null: only clipped runs are found. */
  saturationLevel: number | null;
  /** Adjacent pixels at exactly the spectrum's extreme value that make a clipped run. */
  clipRun: number;
  /** The value a dead pixel reads. */
  deadValue: number;
  /** Consecutive spectra over which a pixel must repeat its value to be stuck. */
  stuckSpectra: number;
  /** Largest change still counted as a repeat (spectrum units). */
  stuckTolerance: number;
  /** Spike threshold, in robust standard deviations of the second differences. */
  spikeK: number;
  /** Smallest second difference that can be a spike (spectrum units). */
  spikeFloor: number;
  /**
   * Largest share of bad pixels with which a spectrum is still judged (by projection with the
   * bad pixels missing); more, and it is stored but not judged.
   */
  maxBadFraction: number;
}

/**
 * Defaults (our choices, stated in docs/bad-pixels.md): spikeK 12 keeps the false-flag rate of
 * Gaussian noise far below one pixel per million; spikeFloor 0.01 absorbance sits far above the
 * detector noise of NIR process analyzers yet far below the spikes worth removing; five spectra
 * for a stuck pixel; at most 5 % of the pixels bad for a spectrum to be judged.
 */
export const DEFAULT_PIXEL_QUALITY: PixelQualitySettings = {
  saturationLevel: null,
  clipRun: 3,
  deadValue: 0,
  stuckSpectra: 5,
  stuckTolerance: 0,
  spikeK: 12,
  spikeFloor: 0.01,
  maxBadFraction: 0.05,
};

export interface PixelQuality {
  /** Per pixel: OR of PIXEL_FLAG_BIT of its flags (0: good). */
  mask: Uint8Array;
  /** Pixels with any flag. */
  bad: number;
  /** Pixels per flag. */
  counts: Record<PixelFlag, number>;
  /** bad / pixels. */
  badFraction: number;
}

export interface PixelQualityChecker {
  check(values: ArrayLike<number>): PixelQuality;
  /** Forget the history (a new analyzer boot). */
  reset(): void;
}

export function resolvePixelQuality(input: Partial<PixelQualitySettings> = {}): PixelQualitySettings {
  const s = { ...DEFAULT_PIXEL_QUALITY, ...input };
  const need = (ok: boolean, name: string, what: string): void => {
    if (!ok) throw new RangeError(`pixel quality: ${name} = ${String((s as Record<string, unknown>)[name])} ${what}`);
  };
  need(s.saturationLevel === null || Number.isFinite(s.saturationLevel), 'saturationLevel', 'must be a finite number or null');
  need(Number.isInteger(s.clipRun) && s.clipRun >= 2, 'clipRun', 'must be an integer ≥ 2');
  need(Number.isFinite(s.deadValue), 'deadValue', 'must be a finite number');
  need(Number.isInteger(s.stuckSpectra) && s.stuckSpectra >= 2, 'stuckSpectra', 'must be an integer ≥ 2');
  need(Number.isFinite(s.stuckTolerance) && s.stuckTolerance >= 0, 'stuckTolerance', 'must be ≥ 0');
  need(Number.isFinite(s.spikeK) && s.spikeK > 0, 'spikeK', 'must be > 0');
  need(Number.isFinite(s.spikeFloor) && s.spikeFloor >= 0, 'spikeFloor', 'must be ≥ 0');
  need(Number.isFinite(s.maxBadFraction) && s.maxBadFraction >= 0 && s.maxBadFraction < 1, 'maxBadFraction', 'must be in [0, 1)');
  return s;
}

/** k-th smallest of a[0…n) (0-based), reordering a in place (Hoare's selection). */
function select(a: Float64Array, n: number, k: number): number {
  let lo = 0;
  let hi = n - 1;
  while (lo < hi) {
    const pivot = a[(lo + hi) >> 1]!;
    let i = lo;
    let j = hi;
    while (i <= j) {
      while (a[i]! < pivot) i++;
      while (a[j]! > pivot) j--;
      if (i <= j) {
        const t = a[i]!;
        a[i] = a[j]!;
        a[j] = t;
        i++;
        j--;
      }
    }
    if (k <= j) hi = j;
    else if (k >= i) lo = i;
    else return a[k]!;
  }
  return a[k]!;
}

export function createPixelQualityChecker(pixels: number, settings: Partial<PixelQualitySettings> = {}): PixelQualityChecker {
  if (!Number.isInteger(pixels) || pixels < 1) throw new RangeError(`pixel quality: ${pixels} pixels`);
  const s = resolvePixelQuality(settings);
  const p = pixels;
  const mask = new Uint8Array(p);
  const prev = new Float64Array(p);
  const repeats = new Int32Array(p); // consecutive repeats of the pixel's value
  const d = new Float64Array(p); // second differences
  const work = new Float64Array(p);
  const counts: Record<PixelFlag, number> = { 'non-finite': 0, saturated: 0, dead: 0, stuck: 0, spike: 0 };
  const out: PixelQuality = { mask, bad: 0, counts, badFraction: 0 };
  let seen = 0;
  const bits = PIXEL_FLAG_BIT;

  function clipRuns(x: ArrayLike<number>, level: number): void {
    let start = 0;
    for (let j = 1; j <= p; j++) {
      if (j < p && x[j] === level && x[start] === level) continue;
      if (x[start] === level && j - start >= s.clipRun) for (let k = start; k < j; k++) mask[k]! |= bits.saturated;
      start = j;
    }
  }

  return {
    reset() {
      seen = 0;
      repeats.fill(0);
    },
    check(x) {
      if (x.length !== p) throw new RangeError(`pixel quality: spectrum has ${x.length} values, the analyzer's axis ${p}`);
      mask.fill(0);
      let max = -Infinity;
      let min = Infinity;
      for (let j = 0; j < p; j++) {
        const v = x[j]!;
        if (!Number.isFinite(v)) {
          mask[j] = bits['non-finite'];
          continue;
        }
        if (v > max) max = v;
        if (v < min) min = v;
        if (s.saturationLevel !== null && v >= s.saturationLevel) mask[j]! |= bits.saturated;
        if (v === s.deadValue) mask[j]! |= bits.dead;
      }
      // A run at the dead value is dead pixels, not a clipped run.
      if (max > min) {
        if (max !== s.deadValue) clipRuns(x, max);
        if (min !== s.deadValue) clipRuns(x, min);
      }
      // Stuck: repeats against the history, only when most pixels changed.
      let changed = 0;
      if (seen > 0) {
        for (let j = 0; j < p; j++) {
          const v = x[j]!;
          const same = Number.isFinite(v) && Math.abs(v - prev[j]!) <= s.stuckTolerance;
          repeats[j] = same ? repeats[j]! + 1 : 0;
          if (!same) changed++;
        }
        if (changed * 2 > p) {
          for (let j = 0; j < p; j++) if (repeats[j]! >= s.stuckSpectra - 1 && mask[j] === 0) mask[j]! |= bits.stuck;
        }
      }
      for (let j = 0; j < p; j++) prev[j] = x[j]!;
      seen++;
      // Spikes: robust scale of the second differences over pixels not already flagged.
      if (p >= 5) {
        let m = 0;
        d[0] = 0;
        d[p - 1] = 0;
        for (let j = 1; j < p - 1; j++) {
          const dj = mask[j - 1] || mask[j] || mask[j + 1] ? 0 : x[j]! - (x[j - 1]! + x[j + 1]!) / 2;
          d[j] = dj;
          if (!(mask[j - 1] || mask[j] || mask[j + 1])) work[m++] = Math.abs(dj);
        }
        if (m > 0) {
          const scale = 1.4826 * select(work, m, m >> 1);
          const thr = Math.max(s.spikeK * scale, s.spikeFloor);
          for (let j = 1; j < p - 1; j++) {
            const dj = d[j]!;
            const a = Math.abs(dj);
            if (!(a > thr)) continue;
            const l = d[j - 1]!;
            const r = d[j + 1]!;
            if (a < Math.abs(l) || a < Math.abs(r)) continue;
            if ((j > 1 && l * dj > 0) || (j < p - 2 && r * dj > 0)) continue;
            mask[j]! |= bits.spike;
          }
        }
      }
      counts['non-finite'] = 0;
      counts.saturated = 0;
      counts.dead = 0;
      counts.stuck = 0;
      counts.spike = 0;
      let bad = 0;
      for (let j = 0; j < p; j++) {
        const b = mask[j]!;
        if (b === 0) continue;
        bad++;
        if (b & bits['non-finite']) counts['non-finite']++;
        if (b & bits.saturated) counts.saturated++;
        if (b & bits.dead) counts.dead++;
        if (b & bits.stuck) counts.stuck++;
        if (b & bits.spike) counts.spike++;
      }
      out.bad = bad;
      out.badFraction = bad / p;
      return out;
    },
  };
}
