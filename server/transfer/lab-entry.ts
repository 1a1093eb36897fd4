/**
 * Lab results that arrive after a batch: matched to the batch's spectrum nearest the sample time
 * (within lab.matchToleranceMs), checked (never overwriting; a correction names the value it
 * supersedes and why) and stored with their audit records in one transaction — the same for the
 * REST route (server/api/routes-lab.ts), `lab add` and `lab import` on the command line.
 */
import { textProblem } from '../../core/io/names.ts';
import { randomUUID } from 'node:crypto';
import type { LabValueRecord, LabValueView } from '../../core/api/rest.ts';
import { checkLabValueAdditions, labValueViews, LabValueError, normalisePropertyName, sameUnit } from '../../core/lab/lab-values.ts';
import { elapsedToTime, nearestSpectrum, parseSampleTime, SampleMatchError } from '../../core/lab/match.ts';
import type { AuditTrail } from '../audit/types.ts';
import type { UnitOfWork } from '../storage/repositories.ts';
import type { BatchRow, Storage } from '../storage/storage.ts';

/** One lab result to attach. The sample time is given once: `sampleT` (ms epoch or ISO 8601) or `elapsedMin`. */
export interface LabEntry {
  batch: string;
  property: string;
  value: number;
  unit: string;
  sampleT?: number | string;
  elapsedMin?: number;
  method?: string | null;
  supersedes?: string | null;
  reason?: string | null;
  /** Where the entry came from, for messages (`lab.csv, line 4`). */
  where?: string;
}

/** A refused entry: `status` for the API (404 unknown batch, 409 conflict, 422 otherwise), `where` the file and line. */
export class LabEntryError extends Error {
  override name = 'LabEntryError';
  constructor(
    readonly status: 404 | 409 | 422,
    readonly code: string,
    message: string,
    readonly where: string | null = null,
    readonly existing: LabValueRecord | null = null,
  ) {
    super(where ? `${where}: ${message}` : message);
  }
}

export interface AttachOptions {
  /** Longest distance between a sample time and its spectrum, ms. */
  toleranceMs: number;
  /** Who entered the values (the session's user, or the command line's --by). */
  user: string;
  now: number;
  /** The audit trail on the same storage: each value's record is written in the values' unit of work. */
  audit?: AuditTrail;
  /** Audit action for new values ('lab-value.add', or 'lab-value.import' for a lab file); corrections are 'lab-value.correct'. */
  action?: string;
  /** Recorded beside each value in the audit trail (e.g. the lab file's name). */
  via?: string;
}

/** Resolve entries to lab values (batch, sample time, nearest spectrum). Throws LabEntryError naming the entry. */
export async function resolveLabEntries(storage: Storage, entries: LabEntry[], opts: AttachOptions): Promise<{ rows: LabValueRecord[]; batches: Map<string, { row: BatchRow; times: Float64Array }> }> {
  const batches = new Map<string, { row: BatchRow; times: Float64Array }>();
  const rows: LabValueRecord[] = [];
  const userProblem = textProblem(opts.user, { max: 200 });
  if (userProblem) throw new LabEntryError(422, 'lab-value-invalid', `the name of who entered the values ${userProblem}`);
  for (const e of entries) {
    const where = e.where ?? null;
    let b = batches.get(e.batch);
    if (!b) {
      const row = await storage.getBatch(e.batch);
      if (!row) throw new LabEntryError(404, 'not-found', `batch "${e.batch}" does not exist`, where);
      b = { row, times: await storage.spectrumTimes(e.batch) };
      batches.set(e.batch, b);
    }
    if ((e.sampleT === undefined) === (e.elapsedMin === undefined)) {
      throw new LabEntryError(422, 'lab-value-invalid', 'give the sample time once: as a time (ms since the epoch or ISO 8601) or as elapsed minutes after the batch start', where);
    }
    let sampleT: number;
    try {
      sampleT = e.sampleT !== undefined ? parseSampleTime(e.sampleT) : elapsedToTime(e.elapsedMin!, b.row.startT);
    } catch (err) {
      throw new LabEntryError(422, 'lab-value-invalid', (err as Error).message, where);
    }
    let m;
    try {
      m = nearestSpectrum(b.times, sampleT, opts.toleranceMs, `batch ${e.batch}`);
    } catch (err) {
      if (err instanceof SampleMatchError) throw new LabEntryError(422, 'lab-value-no-spectrum', err.message, where);
      throw err;
    }
    const method = e.method?.trim() || null;
    const reason = e.reason?.trim() || null;
    // unit, method and reason are shown in views, reports, exports and the audit trail: one line
    // (reasons may have several) of printable text, no control or bidirectional characters
    for (const [field, text, rule] of [
      ['unit', e.unit, { max: 64, empty: true }],
      ['method', method, { max: 200 }],
      ['reason', reason, { max: 2000, multiline: true }],
    ] as const) {
      const p = text === null ? null : textProblem(text, rule);
      if (p) throw new LabEntryError(422, 'lab-value-invalid', `the ${field} ${p}`, where);
    }
    rows.push({
      id: randomUUID(), batch: e.batch, property: normalisePropertyName(e.property), value: e.value, unit: e.unit.trim().replace(/\s+/g, ' '),
      sampleT, spectrumIdx: m.idx, spectrumDtMs: m.dtMs, method, enteredBy: opts.user, enteredAt: opts.now, source: 'entry',
      supersedes: e.supersedes?.trim() || null, reason,
    });
  }
  return { rows, batches };
}

/**
 * Attach lab results, all or none: resolved, checked against what is stored, written with one audit
 * record each in one transaction. Returns the stored values as the API serves them.
 */
export async function attachLabValues(storage: Storage, entries: LabEntry[], opts: AttachOptions): Promise<LabValueView[]> {
  if (entries.length === 0) throw new LabEntryError(422, 'lab-value-invalid', 'no lab values were given');
  const { rows, batches } = await resolveLabEntries(storage, entries, opts);
  const before = new Map<string, LabValueRecord>();
  for (const b of batches.keys()) for (const r of await storage.listLabValues(b)) before.set(r.id, r);
  // Checked one by one first, so a refusal names its entry (file and line); storage checks again
  // inside its transaction, against whatever was stored meanwhile.
  const stored = [...before.values()];
  // A unit written differently but the same ("%w/w" for "% w/w") takes the spelling already stored
  // for that property of the batch, so the batch's values read alike.
  for (const r of rows) {
    const same = [...stored, ...rows].find((x) => x !== r && x.batch === r.batch && x.property === r.property && sameUnit(x.unit, r.unit));
    if (same) r.unit = same.unit;
  }
  for (let i = 0; i < rows.length; i++) {
    try {
      checkLabValueAdditions([...stored, ...rows.slice(0, i)], [rows[i]!]);
    } catch (err) {
      if (err instanceof LabValueError) throw new LabEntryError(err.status, err.code, err.message, entries[i]!.where ?? null, err.existing);
      throw err;
    }
  }
  const record = async (stored: LabValueRecord[], uow: UnitOfWork) => {
    if (!opts.audit) return;
    for (const r of stored) {
      const corrected = r.supersedes ? before.get(r.supersedes) ?? stored.find((x) => x.id === r.supersedes) : undefined;
      await opts.audit.record({
        user: opts.user,
        action: r.supersedes ? 'lab-value.correct' : opts.action ?? 'lab-value.add',
        object: `batch:${r.batch}`,
        before: corrected ? auditView(corrected) : undefined,
        after: { ...auditView(r), ...(opts.via ? { via: opts.via } : {}) },
        reason: r.reason,
      }, uow);
    }
  };
  try {
    await storage.addLabValues(rows, record);
  } catch (err) {
    if (err instanceof LabValueError) throw new LabEntryError(err.status, err.code, err.message, null, err.existing);
    throw err;
  }
  const out: LabValueView[] = [];
  for (const [id, b] of batches) {
    const all = await storage.listLabValues(id);
    const views = labValueViews(all, b.times, b.row.startT);
    for (const r of rows) if (r.batch === id) out.push(views.find((v) => v.id === r.id)!);
  }
  return out;
}

/** What the audit trail keeps of a value. */
function auditView(r: LabValueRecord) {
  return {
    id: r.id, property: r.property, value: r.value, unit: r.unit, sampleT: r.sampleT, spectrumIdx: r.spectrumIdx, spectrumDtMs: r.spectrumDtMs,
    method: r.method, source: r.source, supersedes: r.supersedes,
  };
}
