/**
 * Lab values of a batch as the lab API gives them (GET /api/batches/:batch/lab-values): the rows,
 * which are in force (newest not superseded), their place on the batch's clock for the chart, and
 * the body of a new value or a correction (POST /api/batches/:batch/lab-values).
 */
import type { LabPoint } from './review-property-data.ts';
import { parseNumber } from './bench/form-data.ts';

export interface LabValueRow {
  id: string;
  property: string;
  value: number;
  unit: string;
  /** Sample time, ms epoch. */
  sampleT: number;
  /** Index (0-based) of the batch's spectrum nearest the sample time, and that spectrum's time. */
  spectrumIdx: number | null;
  spectrumT: number | null;
  /** |sample time − matched spectrum's time|, ms. */
  spectrumDtMs: number | null;
  method: string | null;
  enteredBy: string | null;
  enteredAt: number | null;
  source: 'import' | 'entry' | null;
  /** Id of the earlier value this one corrects, and why. */
  supersedes: string | null;
  reason: string | null;
  /** Id of the later value that corrects this one. */
  supersededBy: string | null;
  /** In force: no later value corrects it. */
  effective: boolean;
}

export interface BatchLab {
  rows: LabValueRow[];
  /** Longest allowed distance between a sample time and its spectrum, ms; null when the server does not say. */
  toleranceMs: number | null;
}

const num = (v: unknown): number | null => (typeof v === 'number' && Number.isFinite(v) ? v : null);
const str = (v: unknown): string | null => (typeof v === 'string' ? v : null);

/** The answer of GET …/lab-values ({ items, matchToleranceMs }) as rows oldest sample first; unreadable items are left out. */
export function batchLab(body: unknown): BatchLab {
  const o = body && typeof body === 'object' ? (body as Record<string, unknown>) : {};
  const items = Array.isArray(body) ? body : Array.isArray(o.items) ? o.items : [];
  const rows: LabValueRow[] = [];
  for (const x of items) {
    if (!x || typeof x !== 'object') continue;
    const r = x as Record<string, unknown>;
    const value = num(r.value);
    const sampleT = num(r.sampleT);
    if (typeof r.id !== 'string' || typeof r.property !== 'string' || value === null || sampleT === null) continue;
    rows.push({
      id: r.id,
      property: r.property,
      value,
      unit: str(r.unit) ?? '',
      sampleT,
      spectrumIdx: num(r.spectrumIdx),
      spectrumT: num(r.spectrumT),
      spectrumDtMs: num(r.spectrumDtMs),
      method: str(r.method),
      enteredBy: str(r.enteredBy),
      enteredAt: num(r.enteredAt),
      source: r.source === 'import' || r.source === 'entry' ? r.source : null,
      supersedes: str(r.supersedes),
      reason: str(r.reason),
      supersededBy: str(r.supersededBy),
      effective: false,
    });
  }
  // in force: what no other row corrects (the server says so too; this holds for either answer)
  const replaced = new Set(rows.map((r) => r.supersedes).filter((x): x is string => x !== null));
  for (const r of rows) {
    r.effective = !replaced.has(r.id);
    if (!r.supersededBy) r.supersededBy = rows.find((c) => c.supersedes === r.id)?.id ?? null;
  }
  rows.sort((a, b) => a.sampleT - b.sampleT || (a.enteredAt ?? 0) - (b.enteredAt ?? 0));
  return { rows, toleranceMs: num(o.matchToleranceMs) };
}

/** Values in force of one property (name compared without case or blanks/underscores) in minutes from the batch start. */
export function labPoints(rows: LabValueRow[], property: string, startedAt: number): LabPoint[] {
  const norm = (s: string) => s.trim().toLowerCase().replace(/[\s_]+/g, '_');
  const p = norm(property);
  return rows.filter((r) => r.effective && norm(r.property) === p).map((r) => ({ elapsedMin: (r.sampleT - startedAt) / 60000, value: r.value }));
}

/**
 * A datetime-local field's text ("2026-12-05T13:27" or with seconds) as ms epoch, read in the
 * dashboard's one zone (UTC, docs/dashboard.md "Time"), not the browser's; null when not a time.
 */
export function fieldTimeMs(text: string): number | null {
  if (!/^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}(:\d{2}(\.\d+)?)?$/.test(text.trim())) return null;
  const t = new Date(`${text.trim()}Z`).getTime();
  return Number.isFinite(t) ? t : null;
}

/** ms epoch as a datetime-local field's text to the second, in the dashboard's zone (UTC). */
export function fieldTimeText(t: number): string {
  return new Date(t).toISOString().slice(0, 19);
}

/** What the form holds (all text, as typed). */
export interface LabForm {
  property: string;
  value: string;
  unit: string;
  /** 'clock': a date and time; 'elapsed': minutes after the batch start. */
  timeAs: 'clock' | 'elapsed';
  at: string;
  elapsedMin: string;
  method: string;
  /** The value a correction replaces, and why. */
  supersedes: string | null;
  reason: string;
}

export interface LabValueBody {
  property: string;
  value: number;
  unit: string;
  sampleT: number;
  method?: string;
  supersedes?: string;
  reason?: string;
}

/**
 * The request body for the form, or the problems, each a sentence keyed by the field it concerns.
 * The sample time goes as ms epoch whichever way it was typed (minutes after the start are added to
 * the batch's start time).
 */
export function labBody(f: LabForm, startedAt: number): { body: LabValueBody } | { errors: Record<string, string> } {
  const errors: Record<string, string> = {};
  const value = parseNumber(f.value);
  if (!f.property.trim()) errors.property = 'Name the property the lab measured, e.g. moisture.';
  if (value === null) errors.value = f.value.trim() ? `The value "${f.value.trim()}" is not a number.` : 'Give the value the lab reported.';
  if (!f.unit.trim()) errors.unit = 'Give the unit the lab reports, e.g. % w/w.';
  let sampleT: number | null = null;
  if (f.timeAs === 'clock') {
    sampleT = fieldTimeMs(f.at);
    if (sampleT === null) errors.sampleT = 'Give the date and time the sample was taken.';
  } else {
    const m = parseNumber(f.elapsedMin);
    if (m === null || m < 0) errors.sampleT = 'Give the minutes from the batch start to the sample, a number 0 or more.';
    else sampleT = Math.round(startedAt + m * 60000);
  }
  if (f.supersedes && !f.reason.trim()) errors.reason = 'Say why the earlier value is corrected (it stays on record beside the new one).';
  if (Object.keys(errors).length || value === null || sampleT === null) return { errors };
  return {
    body: {
      property: f.property.trim(),
      value,
      unit: f.unit.trim(),
      sampleT,
      ...(f.method.trim() ? { method: f.method.trim() } : {}),
      ...(f.supersedes ? { supersedes: f.supersedes, reason: f.reason.trim() } : {}),
    },
  };
}

/** A problem's field path ("body.sampleT", "sampleT", "/sampleT") as the form's field key; 'form' when it names none of them. */
export function fieldOf(path: string | undefined): string {
  const k = (path ?? '').replace(/^(body)?[./]?/, '').split(/[./]/)[0] ?? '';
  return ['property', 'value', 'unit', 'sampleT', 'elapsedMin', 'method', 'supersedes', 'reason'].includes(k) ? (k === 'elapsedMin' ? 'sampleT' : k) : 'form';
}
