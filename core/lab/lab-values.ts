/**
 * Laboratory values as data (pure): the rules that keep them a record, and the per-spectrum array
 * a model build takes.
 *
 * - Append-only: a value is never changed. A correction is a new value that names the value it
 *   corrects (`supersedes`) and says why (`reason`); a value is corrected at most once (a later
 *   correction corrects the correction), so each chain has one head.
 * - The effective value is the head of its chain: the newest value not superseded.
 * - Never overwriting: a second value for the same batch, property and spectrum is refused, naming
 *   the value already there, unless it supersedes that value.
 * - One unit per property and batch: a value whose unit differs from the batch's effective values
 *   of that property is refused (values in two units must not meet in one calibration).
 */
import type { LabValueRecord, LabValueView } from '../api/rest.ts';

export type LabValueProblemCode = 'lab-value-conflict' | 'lab-value-unknown' | 'lab-value-invalid';

/** A refused lab value: `status` is the HTTP status the API answers with; `existing` the value in the way. */
export class LabValueError extends Error {
  override name = 'LabValueError';
  constructor(
    readonly status: 404 | 409 | 422,
    readonly code: LabValueProblemCode,
    message: string,
    readonly existing: LabValueRecord | null = null,
  ) {
    super(message);
  }
}

/** Normalised property name: trimmed, lower case, inner blanks as `_` ("LOD Moisture" → "lod_moisture"). */
export function normalisePropertyName(raw: string): string {
  return raw.trim().toLowerCase().replace(/\s+/g, '_');
}

/** Letters first, then letters, digits, `_ . -`; at most 64 characters. */
export const PROPERTY_NAME_RE = /^\p{L}[\p{L}\p{N}_.-]{0,63}$/u;

/** Units compare without regard to blanks and case ("% w/w" = "%w/w"). */
export function sameUnit(a: string, b: string): boolean {
  return a.replace(/\s+/g, '').toLowerCase() === b.replace(/\s+/g, '').toLowerCase();
}

/** How a value is named in messages: `moisture 1.9 % w/w at spectrum 41 (id …)`. */
export function describeLabValue(v: Pick<LabValueRecord, 'id' | 'property' | 'value' | 'unit' | 'spectrumIdx' | 'sampleT'>): string {
  return `${v.property} ${v.value}${v.unit ? ` ${v.unit}` : ''} sampled ${new Date(v.sampleT).toISOString()} at spectrum ${v.spectrumIdx} (id ${v.id})`;
}

/** Id of the value that supersedes each superseded value. */
export function supersededBy(rows: readonly LabValueRecord[]): Map<string, string> {
  const m = new Map<string, string>();
  for (const r of rows) if (r.supersedes) m.set(r.supersedes, r.id);
  return m;
}

/** The values in force (heads of their chains), in the order given. */
export function effectiveLabValues(rows: readonly LabValueRecord[]): LabValueRecord[] {
  const by = supersededBy(rows);
  return rows.filter((r) => !by.has(r.id));
}

/**
 * Check values to be added against the values already stored for their batches (and against each
 * other, in order). Throws LabValueError naming the problem; returns nothing when all may be added.
 */
export function checkLabValueAdditions(existing: readonly LabValueRecord[], incoming: readonly LabValueRecord[]): void {
  const all = [...existing];
  const byId = new Map(all.map((r) => [r.id, r]));
  for (const v of incoming) {
    if (byId.has(v.id)) throw new LabValueError(409, 'lab-value-conflict', `a lab value with id ${v.id} is already stored`, byId.get(v.id)!);
    if (!PROPERTY_NAME_RE.test(v.property)) throw new LabValueError(422, 'lab-value-invalid', `property "${v.property}": use a name that starts with a letter (letters, digits, _ . -; at most 64)`);
    if (!Number.isFinite(v.value)) throw new LabValueError(422, 'lab-value-invalid', `the value of ${v.property} must be a finite number`);
    if (!Number.isFinite(v.sampleT)) throw new LabValueError(422, 'lab-value-invalid', `the sample time of ${v.property} must be a time`);
    const heads = effectiveLabValues(all).filter((r) => r.batch === v.batch && r.property === v.property);
    let replaced: LabValueRecord | null = null;
    if (v.supersedes !== null) {
      if (!v.reason || v.reason.trim() === '') throw new LabValueError(422, 'lab-value-invalid', `a correction needs a reason (it supersedes ${v.supersedes})`);
      const target = byId.get(v.supersedes);
      if (!target) throw new LabValueError(404, 'lab-value-unknown', `lab value ${v.supersedes} (to be superseded) does not exist`);
      if (target.batch !== v.batch || target.property !== v.property) {
        throw new LabValueError(422, 'lab-value-invalid', `lab value ${target.id} is ${target.property} of batch ${target.batch}; a correction must be the same property of the same batch (${v.property} of ${v.batch})`, target);
      }
      const later = all.find((r) => r.supersedes === target.id);
      if (later) throw new LabValueError(409, 'lab-value-conflict', `lab value ${target.id} was already corrected by ${later.id} (${describeLabValue(later)}); correct that one instead`, later);
      replaced = target;
    }
    const others = heads.filter((r) => r.id !== replaced?.id);
    const there = others.find((r) => r.spectrumIdx === v.spectrumIdx);
    if (there) {
      throw new LabValueError(
        409,
        'lab-value-conflict',
        `batch ${v.batch} already has ${describeLabValue(there)}; a value is never overwritten — to correct it, give supersedes=${there.id} and a reason`,
        there,
      );
    }
    const unitClash = others.find((r) => !sameUnit(r.unit, v.unit));
    if (unitClash) {
      throw new LabValueError(422, 'lab-value-invalid', `batch ${v.batch} holds ${v.property} in "${unitClash.unit}" (${describeLabValue(unitClash)}); this value is in "${v.unit}" — give it in the same unit`, unitClash);
    }
    all.push(v);
    byId.set(v.id, v);
  }
}

/**
 * The property as a per-spectrum array for a model build: the effective value at each spectrum that
 * has one, NaN elsewhere (sparse). `unit`: the unit asked for; a value in another unit is refused.
 */
export function labPropertyArray(rows: readonly LabValueRecord[], property: string, spectra: number, unit?: string): { values: Float64Array; count: number; unit: string | null } {
  const values = new Float64Array(spectra).fill(NaN);
  let count = 0;
  let seenUnit: string | null = null;
  for (const r of effectiveLabValues(rows)) {
    if (r.property !== property) continue;
    if (r.spectrumIdx < 0 || r.spectrumIdx >= spectra) throw new RangeError(`lab value ${r.id} points at spectrum ${r.spectrumIdx}; the batch has ${spectra}`);
    if (unit !== undefined && !sameUnit(r.unit, unit)) {
      throw new LabValueError(422, 'lab-value-invalid', `batch ${r.batch}: ${describeLabValue(r)} is in "${r.unit}", the build asks for ${property} in "${unit}"`, r);
    }
    if (!Number.isNaN(values[r.spectrumIdx]!)) throw new RangeError(`batch ${r.batch}: two effective values of ${property} at spectrum ${r.spectrumIdx}`);
    values[r.spectrumIdx] = r.value;
    seenUnit ??= r.unit;
    count++;
  }
  return { values, count, unit: seenUnit };
}

/** Stored values with what a reader needs beside them (their spectrum's time, elapsed time, in force or not). */
export function labValueViews(rows: readonly LabValueRecord[], spectrumTimes: ArrayLike<number>, batchStart: number): LabValueView[] {
  const by = supersededBy(rows);
  return rows.map((r) => ({
    ...r,
    spectrumT: spectrumTimes[r.spectrumIdx] ?? NaN,
    elapsedMin: (r.sampleT - batchStart) / 60_000,
    effective: !by.has(r.id),
    supersededBy: by.get(r.id) ?? null,
  }));
}

/** Per property: its unit and the number of effective values, by name. */
export function labPropertySummary(rows: readonly LabValueRecord[]): { name: string; unit: string; values: number }[] {
  const m = new Map<string, { name: string; unit: string; values: number }>();
  for (const r of effectiveLabValues(rows)) {
    const e = m.get(r.property) ?? { name: r.property, unit: r.unit, values: 0 };
    e.values++;
    m.set(r.property, e);
  }
  return [...m.values()].sort((a, b) => a.name.localeCompare(b.name));
}

/**
 * Every property of a batch as per-spectrum columns, for an export: the effective value on each
 * spectrum that has one, NaN elsewhere, with each property's unit (as ImportedBatch holds them, so
 * the file readers give the same values back).
 */
export function labPropertyColumns(rows: readonly LabValueRecord[], spectra: number): { properties: Record<string, number[]>; propertyUnits: Record<string, string> } {
  const properties: Record<string, number[]> = {};
  const propertyUnits: Record<string, string> = {};
  for (const p of labPropertySummary(rows)) {
    const { values, unit } = labPropertyArray(rows, p.name, spectra);
    properties[p.name] = Array.from(values);
    propertyUnits[p.name] = unit ?? '';
  }
  return { properties, propertyUnits };
}
