/**
 * Checks every way into Tideline shares (the /ingest protocol and the file imports): a spectral
 * value must be a number that survives conversion to float32 (spectra are stored as float32), a time
 * must lie within a window around the server clock, and a wavelength axis must be positive, strictly
 * increasing and inside the configured range.
 *
 * Pure: the caller passes the clock (`now`) and the settings in. Each check returns null when the
 * input is fine, else a sentence naming the problem (the caller adds where: seq, file and line).
 */

/** Largest finite float32 (IEEE 754 binary32: (2 − 2^−23) · 2^127 ≈ 3.4028235e38). */
export const FLOAT32_MAX = 3.4028234663852886e38;

/**
 * null when `v` is a number whose float32 value is finite, else why not: a double such as 1e39 is
 * finite but becomes +Infinity as float32, and NaN/±Infinity are never values.
 */
export function float32Problem(v: unknown): string | null {
  if (typeof v !== 'number') return `is ${v === null ? 'null' : typeof v}, not a number`;
  if (Number.isNaN(v)) return 'is NaN, not a finite number';
  if (!Number.isFinite(v)) return `is ${v}, not a finite number`;
  if (!Number.isFinite(Math.fround(v))) return `= ${v} is beyond the float32 range (±${FLOAT32_MAX}) in which spectra are stored`;
  return null;
}

/** The first value of `values` that is not a finite float32: its index and why, else null. */
export function firstFloat32Problem(values: ArrayLike<unknown>): { index: number; problem: string } | null {
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    // fast path: a finite number whose float32 is finite
    if (typeof v === 'number' && Number.isFinite(Math.fround(v))) continue;
    return { index: i, problem: float32Problem(v) ?? 'is not a finite float32' };
  }
  return null;
}

/** How far an entry's time may lie from the server clock, ms; null = no bound on that side. */
export interface TimeWindow {
  maxAheadMs: number | null;
  maxBehindMs: number | null;
}

/**
 * Default window: 5 min ahead (plant clocks under NTP agree within a second; 5 min is the usual
 * clock-skew allowance between networked hosts — common practice, no published source) and 5 years
 * behind (buffered entries and replays of older batches pass; a clock reset to 1970 or 2000 does
 * not).
 */
export const DEFAULT_TIME_WINDOW: TimeWindow = { maxAheadMs: 300_000, maxBehindMs: 157_788_000_000 };

/** Largest |t| a JavaScript Date holds (±8.64e15 ms, about ±275,000 years). */
export const MAX_DATE_MS = 8.64e15;

export interface TimeProblem {
  /** 'non-finite': NaN/±Infinity; 'ahead'/'behind': outside the window (before 1970 is always 'behind'). */
  kind: 'non-finite' | 'ahead' | 'behind';
  message: string;
}

/**
 * null when `t` (ms since the Unix epoch, UTC) lies within `window` around `now`, never before 1970;
 * else what is wrong, in words that name the setting to change. `settings` names the two settings
 * (e.g. ingest.maxAheadMs).
 */
export function timeProblem(t: number, now: number, window: TimeWindow, settings = { ahead: 'ingest.maxAheadMs', behind: 'ingest.maxBehindMs' }): TimeProblem | null {
  if (!Number.isFinite(t)) return { kind: 'non-finite', message: `t is ${t}, not a finite time` };
  const { maxAheadMs, maxBehindMs } = window;
  if (maxAheadMs !== null && t > now + maxAheadMs) {
    return {
      kind: 'ahead',
      message: `t = ${fmtTime(t)} is ${fmtSpan(t - now)} ahead of the server clock (${fmtTime(now)}); at most ${fmtSpan(maxAheadMs)} ahead is accepted (${settings.ahead}): check the analyzer's clock`,
    };
  }
  if (t > MAX_DATE_MS) {
    return { kind: 'ahead', message: `t = ${t} is beyond the largest time a date can hold (${MAX_DATE_MS} ms, year 275760)` };
  }
  if (t < 0 || (maxBehindMs !== null && t < now - maxBehindMs)) {
    return {
      kind: 'behind',
      message: `t = ${fmtTime(t)} is ${fmtSpan(now - t)} behind the server clock (${fmtTime(now)}); ${
        t < 0 ? 'times before 1970 (negative ms) are never accepted' : `at most ${fmtSpan(maxBehindMs!)} behind is accepted (${settings.behind})`
      }: check the analyzer's clock`,
    };
  }
  return null;
}

/** Wavelength range an axis must lie in, nm. */
export interface AxisRange {
  minNm: number;
  maxNm: number;
}

/** Default: 350 nm … 25,000 nm (25 µm): visible–NIR through mid-IR. */
export const DEFAULT_AXIS_RANGE: AxisRange = { minNm: 350, maxNm: 25_000 };

export interface AxisProblem {
  /** 'not-increasing': a point not above the one before; 'out-of-range': outside `range` (negative or zero nm included). */
  kind: 'not-increasing' | 'out-of-range';
  message: string;
}

/**
 * null when `axis` (nm) is finite, strictly increasing and within `range`; else what is wrong. A
 * descending axis usually means wavenumbers (cm⁻¹) were sent where nm belong; the message says so.
 */
export function axisProblem(axis: ArrayLike<number>, range: AxisRange, settings = 'ingest.axisMinNm, ingest.axisMaxNm'): AxisProblem | null {
  for (let i = 0; i < axis.length; i++) {
    const x = axis[i]!;
    if (!Number.isFinite(x)) return { kind: 'out-of-range', message: `axis[${i}] is ${x}, not a finite wavelength` };
    if (i > 0 && !(x > axis[i - 1]!)) {
      return {
        kind: 'not-increasing',
        message: `axis must increase strictly; axis[${i}] = ${x} nm follows ${axis[i - 1]} nm${x < axis[i - 1]! ? ' (a descending axis is usually wavenumbers in cm⁻¹: send nm, ascending)' : ''}`,
      };
    }
  }
  const lo = axis[0]!;
  const hi = axis[axis.length - 1]!;
  if (!(lo >= range.minNm && hi <= range.maxNm)) {
    return {
      kind: 'out-of-range',
      message: `axis runs from ${lo} to ${hi} nm; wavelengths from ${range.minNm} to ${range.maxNm} nm are accepted (${settings})${lo <= 0 ? ': a wavelength is positive' : ''}`,
    };
  }
  return null;
}

/** ISO 8601 (UTC) of `t`, or null when no date can hold it (non-finite, |t| > 8.64e15 ms). */
export function isoTimeOrNull(t: number): string | null {
  return Number.isFinite(t) && Math.abs(t) <= MAX_DATE_MS ? new Date(t).toISOString() : null;
}

/**
 * Why a stored spectrum cannot be judged (null when it can): a time no date holds, a time not after
 * the spectrum before it (`prevT`), a value that is not a finite float32. /ingest refuses all of
 * these; a batch stored by an older version may hold them.
 */
export function storedSpectrumProblem(t: number, values: ArrayLike<number>, prevT: number): string | null {
  if (isoTimeOrNull(t) === null) return `time ${t} ms is not a valid time`;
  if (!(t > prevT)) return `time ${isoTimeOrNull(t)} is not after the spectrum before it`;
  const bad = firstFloat32Problem(values);
  if (bad) return `value ${bad.index} ${bad.problem}`;
  return null;
}

/** A time for a message: ISO 8601 when a date can hold it, else the number itself (never throws). */
export function fmtTime(t: number): string {
  return Number.isFinite(t) && Math.abs(t) <= MAX_DATE_MS ? new Date(t).toISOString() : String(t);
}

/** A span of ms in words: 42 s, 7.5 min, 3.2 h, 12 days, 2.00 years. */
export function fmtSpan(ms: number): string {
  const s = ms / 1000;
  if (!Number.isFinite(s)) return String(ms);
  if (s < 120) return `${s.toFixed(0)} s`;
  if (s < 7200) return `${(s / 60).toFixed(s < 600 ? 1 : 0)} min`;
  if (s < 172_800) return `${(s / 3600).toFixed(1)} h`;
  if (s < 3 * 31_557_600) return `${(s / 86_400).toFixed(0)} days`;
  return `${(s / 31_557_600).toPrecision(3)} years`;
}
