/**
 * Review: the batch's lab values, and a form to attach a lab result that arrived after the batch
 * (sample time, value, unit, method). The server matches it to the spectrum nearest the sample
 * time, records who entered it from the session, and never overwrites an earlier value: a
 * correction is a new value that names the one it replaces, with a reason, and both stay listed.
 */
import { useState } from 'preact/hooks';
import { post } from '../api/http.ts';
import { ApiError, errorText } from '../api/problem.ts';
import type { Me } from '../api/session.ts';
import { ErrorBox } from '../components/status.tsx';
import { clock, dateTime, dateTimeSec, minutes, sig, TIME_ZONE } from '../format/number-format.ts';
import { FieldError } from './bench/field-error.tsx';
import { fieldOf, labBody, fieldTimeText, type LabForm, type LabValueRow } from './review-lab-data.ts';

/** A lab value as the lab reported it (no padding zeros): "4.2 % w/w". */
const labValue = (v: number, unit: string) => `${String(Number(v.toPrecision(6))).replace('-', '−')}${unit ? ` ${unit}` : ''}`;


export function LabValues({
  batch,
  startedAt,
  rows,
  toleranceMs,
  property,
  me,
  onAdded,
}: {
  batch: string;
  startedAt: number;
  /** null: this server has no lab-values route. */
  rows: LabValueRow[] | null;
  toleranceMs: number | null;
  /** The property the batch's model predicts, offered first. */
  property: { name: string; unit: string } | null;
  me: Me | null;
  onAdded: () => void;
}) {
  const blank = (): LabForm => ({ property: property?.name ?? '', value: '', unit: property?.unit ?? '', timeAs: 'elapsed', at: fieldTimeText(startedAt), elapsedMin: '', method: '', supersedes: null, reason: '' });
  const [form, setForm] = useState<LabForm>(blank);
  const [errors, setErrors] = useState<Record<string, string>>({});
  const [busy, setBusy] = useState(false);
  const [done, setDone] = useState<string | null>(null);
  const set = (k: keyof LabForm) => (e: Event) => setForm({ ...form, [k]: (e.target as HTMLInputElement).value });
  const byId = new Map((rows ?? []).map((r) => [r.id, r]));
  const correcting = form.supersedes ? byId.get(form.supersedes) ?? null : null;
  const canEnter = me !== null && me.user.role !== 'viewer';

  const correct = (r: LabValueRow) => {
    setDone(null);
    setErrors({});
    setForm({ property: r.property, value: '', unit: r.unit, timeAs: 'clock', at: fieldTimeText(r.sampleT), elapsedMin: sig((r.sampleT - startedAt) / 60000, 6), method: r.method ?? '', supersedes: r.id, reason: '' });
    document.getElementById('lab-form')?.scrollIntoView({ block: 'nearest' });
  };

  const submit = async (e: Event) => {
    e.preventDefault();
    setDone(null);
    const out = labBody(form, startedAt);
    if ('errors' in out) {
      setErrors(out.errors);
      return;
    }
    setErrors({});
    setBusy(true);
    try {
      await post(`/api/batches/${encodeURIComponent(batch)}/lab-values`, out.body);
      const b = out.body;
      setDone(`${b.property} ${labValue(b.value, b.unit)} sampled ${dateTime(b.sampleT)} (${minutes((b.sampleT - startedAt) / 60000)} from the start) ${b.supersedes ? 'now replaces the corrected value' : 'attached'}.`);
      setForm({ ...blank(), property: b.property, unit: b.unit, method: b.method ?? '' });
      onAdded();
    } catch (err) {
      // the problem's field errors go beside their field; the rest above the button
      const f: Record<string, string> = {};
      if (err instanceof ApiError && err.problem.errors?.length) {
        for (const x of err.problem.errors) {
          const k = fieldOf(x.path);
          const shown = k === 'supersedes' || k === 'reason' ? (form.supersedes ? k : 'form') : k;
          f[shown] = f[shown] ? `${f[shown]} ${x.message}` : x.message;
        }
        if (!f.form && err.problem.detail && !Object.values(f).includes(err.problem.detail)) f.form = err.problem.detail;
        // a value already on that spectrum: the way to change it on this screen is "Correct…" on its row
        if (err.status === 409 && !form.supersedes && f.form) f.form = `${f.form.replace(/;?\s*—?\s*to correct it, give supersedes=\S+ and a reason\.?/, '.').replace(/\.\.$/, '.')} To change it, use “Correct…” on its row and give the reason.`;
      } else if (err instanceof ApiError && err.status === 404 && /no API route/.test(err.problem.detail ?? '')) {
        f.form = 'This server does not accept lab results for a batch (it has no lab-values route): update the server.';
      } else if (err instanceof ApiError && err.status === 403) {
        f.form = `Attaching a lab result needs the operator role or above; ${me ? `you are signed in as ${me.user.role}` : 'sign in'}.`;
      } else f.form = errorText(err);
      setErrors(f);
    } finally {
      setBusy(false);
    }
  };

  return (
    <div class="panel" data-testid="lab-values">
      <h3>Lab values</h3>
      {rows === null ? (
        <p class="muted">This server does not store lab values for batches.</p>
      ) : rows.length === 0 ? (
        <p class="muted">No lab values for this batch.</p>
      ) : (
        <table class="batch-table" data-testid="lab-table">
          <thead>
            <tr>
              <th scope="col">sampled ({TIME_ZONE})</th>
              <th scope="col" class="num">from start</th>
              <th scope="col">property</th>
              <th scope="col" class="num">value</th>
              <th scope="col">method</th>
              <th scope="col">matched spectrum</th>
              <th scope="col">entered</th>
              <th scope="col">status</th>
              {canEnter && <th scope="col"><span class="sr-only">correct</span></th>}
            </tr>
          </thead>
          <tbody>
            {rows.map((r) => (
              <tr key={r.id} class={r.effective ? '' : 'muted'} data-testid="lab-row">
                <td>{dateTimeSec(r.sampleT)}</td>
                <td class="num">{minutes((r.sampleT - startedAt) / 60000)}</td>
                <td>{r.property}</td>
                <td class="num">{labValue(r.value, r.unit)}</td>
                <td>{r.method ?? '—'}</td>
                <td class="small">
                  {r.spectrumIdx === null ? '—' : `no. ${r.spectrumIdx + 1}`}
                  {r.spectrumT !== null && ` at ${clock(r.spectrumT)}`}
                  {r.spectrumDtMs !== null && ` (${sig(r.spectrumDtMs / 1000, 3)} s from the sample)`}
                </td>
                <td class="small">
                  {r.source === 'import' ? 'imported with the spectra' : 'entered'}
                  {r.enteredBy ? ` by ${r.enteredBy}` : ''}
                  {r.enteredAt ? `, ${dateTime(r.enteredAt)}` : ''}
                </td>
                <td class="small">
                  {r.effective ? <strong>in force</strong> : <span>corrected{r.supersededBy && byId.get(r.supersededBy) ? ` to ${labValue(byId.get(r.supersededBy)!.value, byId.get(r.supersededBy)!.unit)}` : ''}</span>}
                  {r.supersedes && (
                    <span>
                      {' '}
                      — corrects {byId.get(r.supersedes) ? labValue(byId.get(r.supersedes)!.value, byId.get(r.supersedes)!.unit) : 'an earlier value'}: “{r.reason}”
                    </span>
                  )}
                </td>
                {canEnter && (
                  <td>
                    {r.effective && (
                      <button type="button" class="btn small" onClick={() => correct(r)} data-testid={`correct-${r.id}`}>
                        Correct…
                      </button>
                    )}
                  </td>
                )}
              </tr>
            ))}
          </tbody>
        </table>
      )}
      {rows !== null && canEnter && (
        <form class="lab-form" id="lab-form" onSubmit={submit} data-testid="lab-form" noValidate>
          <h4>{correcting ? `Correct ${correcting.property} ${labValue(correcting.value, correcting.unit)} sampled ${dateTime(correcting.sampleT)}` : 'Attach a lab result'}</h4>
          <div class="form-row">
            <label>
              Property <input size={10} value={form.property} onInput={set('property')} placeholder="moisture" disabled={!!correcting} />
            </label>
            <label>
              Value <input size={7} value={form.value} onInput={set('value')} placeholder="1.9" inputMode="decimal" />
            </label>
            <label>
              Unit <input size={7} value={form.unit} onInput={set('unit')} placeholder="% w/w" />
            </label>
            <label>
              Method <input size={8} value={form.method} onInput={set('method')} placeholder="LOD" />
            </label>
          </div>
          <FieldError text={errors.property} />
          <FieldError text={errors.value} />
          <FieldError text={errors.unit} />
          <FieldError text={errors.method} />
          <div class="form-row">
            <span>Sampled</span>
            <label>
              <input type="radio" name="lab-time-as" checked={form.timeAs === 'elapsed'} onChange={() => setForm({ ...form, timeAs: 'elapsed' })} /> minutes after the batch start
            </label>
            <label>
              <input type="radio" name="lab-time-as" checked={form.timeAs === 'clock'} onChange={() => setForm({ ...form, timeAs: 'clock' })} /> at a date and time ({TIME_ZONE})
            </label>
            {form.timeAs === 'elapsed' ? (
              <label>
                min <input size={6} value={form.elapsedMin} onInput={set('elapsedMin')} placeholder="42" inputMode="decimal" aria-label="minutes after the batch start" />
              </label>
            ) : (
              <input type="datetime-local" step={1} value={form.at} onInput={set('at')} aria-label="sample date and time" />
            )}
          </div>
          <FieldError text={errors.sampleT} />
          {correcting && (
            <>
              <label class="block">
                Reason for the correction{' '}
                <textarea rows={2} cols={60} value={form.reason} onInput={set('reason')} placeholder="e.g. balance out of calibration; re-weighed" />
              </label>
              <FieldError text={errors.reason} />
              <FieldError text={errors.supersedes} />
            </>
          )}
          <p class="muted small">
            Entered as {me ? `${me.user.fullName} (${me.user.role})` : 'the signed-in user'}. The result is matched to the spectrum nearest its sample time
            {toleranceMs !== null ? ` (at most ${minutes(toleranceMs / 60000)} away, or it is refused)` : ''}. A value is never overwritten: a correction is a new value that names
            the one it replaces, with a reason; both stay on record.
          </p>
          <button class="btn" type="submit" disabled={busy} data-testid="lab-submit">
            {busy ? 'Attaching…' : correcting ? 'Record the correction' : 'Attach'}
          </button>{' '}
          {correcting && (
            <button type="button" class="btn" onClick={() => { setForm(blank()); setErrors({}); }}>
              Cancel the correction
            </button>
          )}
          {done && (
            <p role="status" data-testid="lab-done">
              {done}
            </p>
          )}
          {errors.form && <ErrorBox message={errors.form} />}
        </form>
      )}
      {rows !== null && !canEnter && <p class="muted small">Attaching or correcting lab results needs the operator role or above.</p>}
    </div>
  );
}
