import { DEFAULT_TIME_WINDOW, MAX_DATE_MS, float32Problem, fmtSpan, fmtTime, timeProblem } from '../protocol/plausibility.ts';

/**
 * What an import yields: whole batches of raw spectra on one wavelength axis (nm), with their
 * times and any per-spectrum property columns (e.g. laboratory moisture for a PLS model).
 */
export interface ImportedBatch {
  id: string;
  /** Wavelengths in nm, strictly increasing. */
  axis: Float64Array;
  /** ms since the Unix epoch (or since an origin the importer was given), one per spectrum. */
  times: number[];
  spectra: Float32Array[];
  /**
   * Per-spectrum properties (laboratory values) by normalised name, e.g. { moisture: [NaN, 6.3, NaN, …] }:
   * NaN where the spectrum has no value (sparse).
   */
  properties: Record<string, number[]>;
  /** Unit of each property ('' when the file gives none), e.g. { moisture: '% w/w' }. */
  propertyUnits?: Record<string, string>;
  product?: string;
  unit?: string;
  source: { file: string; firstLine: number; lastLine: number };
}

/** A file that cannot be imported: names the file, the line (1-based; 0 when it concerns the whole file) and the reason. */
export class ImportError extends Error {
  constructor(
    readonly file: string,
    readonly line: number,
    readonly reason: string,
  ) {
    super(line > 0 ? `${file}, line ${line}: ${reason}` : `${file}: ${reason}`);
    this.name = 'ImportError';
  }
}

/** Plausible NIR axis in nm (about 700–2600 nm for NIR; wider to admit Vis–NIR instruments). */
export const NM_PLAUSIBLE: [number, number] = [300, 3000];
/** Plausible NIR axis in wavenumbers, cm⁻¹ (about 4,000–12,500). */
export const WAVENUMBER_PLAUSIBLE: [number, number] = [3000, 15000];

/**
 * Check an axis (in nm after any unit conversion) and return it increasing, with a flag saying whether
 * the file's order was reversed. Refuses non-monotone axes, duplicates and implausible units.
 */
export function normalizeAxis(axisNm: number[], file: string, line: number): { axis: Float64Array; reversed: boolean } {
  if (axisNm.length < 2) throw new ImportError(file, line, `the wavelength axis has ${axisNm.length} point(s); at least 2 are needed`);
  const increasing = axisNm[1]! > axisNm[0]!;
  for (let i = 1; i < axisNm.length; i++) {
    const up = axisNm[i]! > axisNm[i - 1]!;
    if (axisNm[i] === axisNm[i - 1] || up !== increasing) {
      throw new ImportError(file, line, `the wavelength axis is not monotone: ${axisNm[i - 1]} nm is followed by ${axisNm[i]} nm (point ${i + 1})`);
    }
  }
  const sorted = increasing ? axisNm : [...axisNm].reverse();
  const lo = sorted[0]!;
  const hi = sorted[sorted.length - 1]!;
  if (lo < NM_PLAUSIBLE[0] || hi > NM_PLAUSIBLE[1]) {
    const looksWn = lo >= WAVENUMBER_PLAUSIBLE[0] && hi <= WAVENUMBER_PLAUSIBLE[1];
    throw new ImportError(
      file,
      line,
      looksWn
        ? `the axis runs ${lo}…${hi}, which looks like wavenumbers in cm⁻¹, not nm; give the axis in nm or import with the axis unit set to cm-1`
        : `the axis runs ${lo}…${hi}, outside the ${NM_PLAUSIBLE[0]}–${NM_PLAUSIBLE[1]} nm expected of an NIR analyzer; check the unit`,
    );
  }
  return { axis: Float64Array.from(sorted), reversed: !increasing };
}

/** Convert wavenumbers (cm⁻¹) to nm: λ[nm] = 10⁷ / ν̃[cm⁻¹]. */
export function wavenumberToNm(wn: number): number {
  return 1e7 / wn;
}

/**
 * Times of imported spectra: never before 1970 (negative ms), never beyond what a date can hold,
 * and — when the importer passes the clock as `now` — never more than the protocol's default
 * clock-skew allowance (5 min) ahead of it. Historical batches may be of any age. The same checks
 * as /ingest (core/protocol/plausibility.ts), with no bound behind.
 */
export const IMPORT_TIME_WINDOW = { maxAheadMs: DEFAULT_TIME_WINDOW.maxAheadMs, maxBehindMs: null };

/** Throws ImportError (file, line) when `t` is not a time an imported spectrum may have. */
export function checkImportTime(t: number, now: number | undefined, file: string, line: number, where = ''): void {
  const window = now === undefined ? { maxAheadMs: null, maxBehindMs: null } : IMPORT_TIME_WINDOW;
  const p = timeProblem(t, now ?? 0, window);
  if (!p) return;
  let why: string;
  if (p.kind === 'non-finite') why = `the time is ${t}, not a finite number`;
  else if (t < 0) why = `the time ${t} ms lies before 1970 (times are ms since 1970-01-01 UTC; a negative time is never accepted)`;
  else if (t > MAX_DATE_MS) why = `the time ${t} ms is beyond the largest time a date can hold (${MAX_DATE_MS} ms, the year 275760)`;
  else why = `the time ${fmtTime(t)} is ${fmtSpan(t - now!)} ahead of this computer's clock (${fmtTime(now!)}); an imported spectrum cannot come from the future (at most ${fmtSpan(IMPORT_TIME_WINDOW.maxAheadMs!)} of clock difference is allowed)`;
  throw new ImportError(file, line, `${where}${why}`);
}

/** Throws ImportError (file, line) when `v` is not a value a spectrum can hold (finite float32). */
export function checkImportValue(v: number, file: string, line: number, what: string): void {
  const p = float32Problem(v);
  if (p) throw new ImportError(file, line, `${what} ${p}`);
}
