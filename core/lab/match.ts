/**
 * Matching a lab sample to a spectrum, and reading sample times (pure).
 *
 * A sample is matched to the batch's spectrum nearest its sample time; when even that one is further
 * away than the tolerance, the sample is refused, naming both times — a value on the wrong spectrum
 * would teach the calibration a wrong pair. At equal distance the earlier spectrum is taken (the
 * material the probe saw before the sample was drawn).
 */

export interface SpectrumMatch {
  /** Index of the nearest spectrum. */
  idx: number;
  /** Its time, ms epoch. */
  t: number;
  /** |sample time − spectrum time|, ms. */
  dtMs: number;
}

export class SampleMatchError extends Error {
  override name = 'SampleMatchError';
  constructor(
    message: string,
    readonly sampleT: number,
    readonly nearestT: number | null,
  ) {
    super(message);
  }
}

const iso = (t: number) => new Date(t).toISOString();

function fmtGap(ms: number): string {
  if (ms < 60_000) return `${(ms / 1000).toFixed(ms < 10_000 ? 1 : 0)} s`;
  const min = ms / 60_000;
  return `${min < 100 ? min.toFixed(1) : Math.round(min)} min`;
}

/**
 * The spectrum nearest `sampleT` among `times` (increasing, ms epoch), within `toleranceMs`.
 * Throws SampleMatchError naming the sample time, the nearest spectrum's time and the tolerance.
 */
export function nearestSpectrum(times: ArrayLike<number>, sampleT: number, toleranceMs: number, what = 'the sample'): SpectrumMatch {
  const n = times.length;
  if (!Number.isFinite(sampleT)) throw new SampleMatchError(`${what}: the sample time is not a time`, sampleT, null);
  if (n === 0) throw new SampleMatchError(`${what}: the batch has no spectra to match the sample to`, sampleT, null);
  // Binary search for the first spectrum at or after sampleT.
  let lo = 0;
  let hi = n;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (times[mid]! < sampleT) lo = mid + 1;
    else hi = mid;
  }
  let idx: number;
  if (lo === 0) idx = 0;
  else if (lo === n) idx = n - 1;
  else idx = sampleT - times[lo - 1]! <= times[lo]! - sampleT ? lo - 1 : lo;
  const t = times[idx]!;
  const dtMs = Math.abs(sampleT - t);
  if (!(dtMs <= toleranceMs)) {
    const where = sampleT < times[0]! ? 'before the first spectrum' : sampleT > times[n - 1]! ? 'after the last spectrum' : 'between spectra';
    throw new SampleMatchError(
      `${what}: sample time ${iso(sampleT)} is ${fmtGap(dtMs)} from the nearest spectrum (${iso(t)}, spectrum ${idx}, ${where}); ` +
        `the match tolerance is ${fmtGap(toleranceMs)} (lab.matchToleranceMs) — check the sample time and the batch`,
      sampleT,
      t,
    );
  }
  return { idx, t, dtMs };
}

/** Digits only, at least 11 of them: ms since the epoch (1973 onwards), never minutes or seconds. */
const EPOCH_MS_RE = /^\d{11,}$/;

/**
 * A sample time as ms epoch: a number (ms since the Unix epoch), a string of digits (the same), or
 * an ISO 8601 date-time with a time zone (`Z` or `±hh:mm`) — a local time without zone is refused,
 * because the lab's clock zone is not known here.
 */
export function parseSampleTime(raw: number | string): number {
  if (typeof raw === 'number') {
    if (!Number.isFinite(raw)) throw new RangeError(`sample time ${raw} is not a number`);
    if (raw < 1e11) throw new RangeError(`sample time ${raw} is before 1973 as ms since the epoch; for minutes after the batch start give elapsed minutes`);
    return raw;
  }
  const s = raw.trim();
  if (EPOCH_MS_RE.test(s)) return Number(s);
  if (!/^\d{4}-\d{2}-\d{2}[T ]\d{2}:\d{2}(:\d{2}(\.\d+)?)?(Z|[+-]\d{2}:?\d{2})$/i.test(s)) {
    throw new RangeError(`sample time "${raw}" is not an ISO 8601 date-time with a zone (e.g. 2026-03-02T08:41:00Z) nor ms since the epoch`);
  }
  const t = Date.parse(s.replace(' ', 'T'));
  if (!Number.isFinite(t)) throw new RangeError(`sample time "${raw}" is not a valid date-time`);
  return t;
}

/** Elapsed minutes after the batch start as ms epoch. */
export function elapsedToTime(elapsedMin: number, batchStart: number): number {
  if (!Number.isFinite(elapsedMin) || elapsedMin < 0) throw new RangeError(`elapsed time ${elapsedMin} min must be a number of minutes ≥ 0 after the batch start`);
  return batchStart + Math.round(elapsedMin * 60_000);
}
