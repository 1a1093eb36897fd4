/**
 * Review's lab-value helpers: reading GET /api/batches/:batch/lab-values (corrections marked, the
 * values in force), the request body the form sends (sample time by clock or minutes from the
 * start; a correction needs a reason) and where a problem's field error goes.
 */
import { describe, expect, it } from 'vitest';
import { batchLab, fieldOf, labBody, labPoints, fieldTimeMs, fieldTimeText, type LabForm } from '../../web/src/views/review-lab-data.ts';

const START = Date.UTC(2026, 11, 5, 8, 0, 0);
const item = (o: Record<string, unknown>) => ({
  batch: 'b1', unit: '% w/w', method: 'LOD', enteredBy: 'qa1', enteredAt: START + 7_200_000, source: 'entry', supersedes: null, reason: null,
  spectrumIdx: 3, spectrumT: START + 180_000, spectrumDtMs: 4_000, elapsedMin: 3, effective: true, supersededBy: null, ...o,
});

describe('lab values of a batch', () => {
  const body = {
    batch: 'b1',
    matchToleranceMs: 120_000,
    items: [
      item({ id: 'c', property: 'moisture', value: 2.1, sampleT: START + 40 * 60000, supersedes: 'a', reason: 'balance recalibrated', enteredAt: START + 9_000_000 }),
      item({ id: 'a', property: 'moisture', value: 2.6, sampleT: START + 40 * 60000 }),
      item({ id: 'b', property: 'moisture', value: 9.5, sampleT: START + 10 * 60000, source: 'import' }),
      item({ id: 'd', property: 'assay', value: 99, sampleT: START + 50 * 60000 }),
      { id: 'bad', property: 'moisture', value: 'n/a', sampleT: START },
    ],
  };
  const lab = batchLab(body);
  it('reads the rows oldest sample first, leaves unreadable ones out and keeps the tolerance', () => {
    expect(lab.rows.map((r) => r.id)).toEqual(['b', 'a', 'c', 'd']);
    expect(lab.toleranceMs).toBe(120_000);
    expect(lab.rows[0]!.source).toBe('import');
  });
  it('marks a corrected value as no longer in force, and links both ways', () => {
    const a = lab.rows.find((r) => r.id === 'a')!;
    const c = lab.rows.find((r) => r.id === 'c')!;
    expect(a.effective).toBe(false);
    expect(a.supersededBy).toBe('c');
    expect(c.effective).toBe(true);
    expect(c.supersedes).toBe('a');
  });
  it('places the values in force of one property on the batch clock', () => {
    expect(labPoints(lab.rows, 'Moisture', START)).toEqual([
      { elapsedMin: 10, value: 9.5 },
      { elapsedMin: 40, value: 2.1 },
    ]);
    expect(labPoints(lab.rows, 'assay', START)).toEqual([{ elapsedMin: 50, value: 99 }]);
  });
  it('gives no rows for an answer it cannot read', () => {
    expect(batchLab(null)).toEqual({ rows: [], toleranceMs: null });
  });
});

describe('the form to attach a lab result', () => {
  const f = (o: Partial<LabForm>): LabForm => ({ property: 'moisture', value: '1,9', unit: '% w/w', timeAs: 'elapsed', at: '', elapsedMin: '42.5', method: 'LOD', supersedes: null, reason: '', ...o });
  it('sends minutes after the start as a sample time in ms epoch', () => {
    expect(labBody(f({}), START)).toEqual({ body: { property: 'moisture', value: 1.9, unit: '% w/w', sampleT: START + 42.5 * 60000, method: 'LOD' } });
  });
  it("sends a clock time typed in the dashboard's zone (UTC) as that instant", () => {
    const at = fieldTimeText(START + 3_723_000);
    expect(at).toBe(new Date(START + 3_723_000).toISOString().slice(0, 19));
    expect(fieldTimeMs('2026-12-05T13:27')).toBe(Date.UTC(2026, 11, 5, 13, 27));
    expect(fieldTimeMs(at)).toBe(START + 3_723_000);
    const out = labBody(f({ timeAs: 'clock', at, method: ' ' }), START);
    expect(out).toEqual({ body: { property: 'moisture', value: 1.9, unit: '% w/w', sampleT: START + 3_723_000 } });
  });
  it('names each missing or wrong field in a sentence', () => {
    const out = labBody(f({ property: ' ', value: 'abc', unit: '', elapsedMin: '-3' }), START);
    expect('errors' in out && out.errors).toEqual({
      property: 'Name the property the lab measured, e.g. moisture.',
      value: 'The value "abc" is not a number.',
      unit: 'Give the unit the lab reports, e.g. % w/w.',
      sampleT: 'Give the minutes from the batch start to the sample, a number 0 or more.',
    });
    const clock = labBody(f({ timeAs: 'clock', at: '5 Dec 10:00' }), START);
    expect('errors' in clock && clock.errors.sampleT).toBe('Give the date and time the sample was taken.');
  });
  it('a correction names the value it replaces and needs a reason', () => {
    const none = labBody(f({ supersedes: 'a' }), START);
    expect('errors' in none && none.errors.reason).toMatch(/^Say why the earlier value is corrected/);
    const out = labBody(f({ supersedes: 'a', reason: ' re-weighed ' }), START);
    expect('body' in out && out.body).toMatchObject({ supersedes: 'a', reason: 're-weighed' });
  });
  it('puts a problem field error beside its field, anything else above the button', () => {
    expect(fieldOf('body.sampleT')).toBe('sampleT');
    expect(fieldOf('/value')).toBe('value');
    expect(fieldOf('elapsedMin')).toBe('sampleT');
    expect(fieldOf('body')).toBe('form');
    expect(fieldOf(undefined)).toBe('form');
    expect(fieldOf('body.other')).toBe('form');
  });
});
