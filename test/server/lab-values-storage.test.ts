/**
 * Lab values in storage (migration 004_lab_values.sql, Storage.addLabValues / listLabValues,
 * IngestWrite.labValues): append-only, never overwriting, corrections with a reason, the effective
 * value the newest not superseded; written in the import's one transaction on both commit paths
 * (inline and the opt-in writer thread).
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import type { LabValueRecord } from '../../core/api/rest.ts';
import { effectiveLabValues, labPropertyArray, LabValueError } from '../../core/lab/lab-values.ts';
import { SqliteStorage } from '../../server/storage/sqlite-storage.ts';
import { emptyIngestWrite } from '../../server/storage/storage.ts';

const dir = mkdtempSync(join(tmpdir(), 'tideline-lab-st-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const T0 = Date.UTC(2026, 2, 2, 8);

async function withBatch(s: SqliteStorage, n = 5, labValues: LabValueRecord[] = []) {
  await s.createUnit({ id: 'u', name: 'u', kind: 'dryer', description: '', createdAt: 0 });
  await s.createAnalyzer({ id: 'a', name: 'a', createdAt: 0 });
  const w = emptyIngestWrite();
  w.batchStarts.push({ id: 'B-1', unit: 'u', analyzer: 'a', boot: 1, product: 'p', startSeq: 0, startT: T0, axis: Float64Array.of(1000, 1010), modelVersion: null, createdAt: 0 });
  for (let i = 0; i < n; i++) w.spectra.push({ batch: 'B-1', idx: i, seq: i + 1, t: T0 + 60_000 * i, values: Float32Array.of(i, i), analyzer: 'a', boot: 1, receivedAt: 0 });
  w.labValues.push(...labValues);
  await s.commitIngest(w);
}

let n = 0;
function lab(over: Partial<LabValueRecord>): LabValueRecord {
  return {
    id: `lv-${++n}`, batch: 'B-1', property: 'moisture', value: 5, unit: '% w/w', sampleT: T0, spectrumIdx: 0, spectrumDtMs: 0, method: 'LOD',
    enteredBy: 'lab.analyst', enteredAt: T0 + 3_600_000, source: 'entry', supersedes: null, reason: null, ...over,
  };
}

async function refused(p: Promise<unknown>): Promise<LabValueError> {
  try {
    await p;
  } catch (e) {
    expect(e).toBeInstanceOf(LabValueError);
    return e as LabValueError;
  }
  throw new Error('expected a LabValueError');
}

describe('lab values in storage', () => {
  it('are written with the spectra in one commit, inline and in the writer thread', async () => {
    for (const ingestInWorker of [false, true]) {
      const s = new SqliteStorage({ file: join(dir, `c-${ingestInWorker}.db`), ingestInWorker });
      const v = lab({ source: 'import', spectrumIdx: 2, sampleT: T0 + 120_000, method: null });
      await withBatch(s, 5, [v]);
      expect(await s.listLabValues('B-1')).toEqual([v]);
      expect(Array.from(await s.spectrumTimes('B-1'))).toEqual([0, 1, 2, 3, 4].map((i) => T0 + 60_000 * i));
      // A lab value for a spectrum the commit does not hold is refused by the schema, with the whole commit.
      const bad = emptyIngestWrite();
      bad.spectra.push({ batch: 'B-1', idx: 5, seq: 6, t: T0 + 300_000, values: Float32Array.of(0, 0), analyzer: 'a', boot: 1, receivedAt: 0 });
      bad.labValues.push(lab({ spectrumIdx: 9 }));
      await expect(s.commitIngest(bad)).rejects.toThrow(/FOREIGN KEY/);
      expect(await s.spectrumTimes('B-1')).toHaveLength(5);
      await s.close();
    }
  });

  it('are never changed or deleted (triggers), never overwritten, and corrected only with a reason', async () => {
    const s = new SqliteStorage({ file: ':memory:' });
    await withBatch(s);
    const a = lab({ spectrumIdx: 1, value: 7.2 });
    await s.addLabValues([a]);
    expect(() => s.db.prepare('UPDATE lab_values SET value = 1').run()).toThrow(/never changed/);
    expect(() => s.db.prepare('DELETE FROM lab_values').run()).toThrow(/never deleted/);

    // A second value on the same spectrum is refused, naming the one there.
    let e = await refused(s.addLabValues([lab({ spectrumIdx: 1, value: 7.0 })]));
    expect(e.status).toBe(409);
    expect(e.message).toContain(a.id);
    expect(e.message).toMatch(/never overwritten.*supersedes=/);
    expect(e.existing?.id).toBe(a.id);
    // A correction without a reason is refused; with one it is stored and becomes the effective value.
    e = await refused(s.addLabValues([lab({ spectrumIdx: 1, value: 7.0, supersedes: a.id })]));
    expect(e.status).toBe(422);
    expect(e.message).toMatch(/needs a reason/);
    const b = lab({ spectrumIdx: 1, value: 7.0, supersedes: a.id, reason: 'transcription error: 7.0 on the lab sheet' });
    await s.addLabValues([b]);
    // The same value cannot be corrected twice (the chain keeps one head): correct the correction.
    e = await refused(s.addLabValues([lab({ spectrumIdx: 1, value: 6.9, supersedes: a.id, reason: 'again' })]));
    expect(e.status).toBe(409);
    expect(e.message).toContain(b.id);
    // A correction may move the value to another spectrum (the sample time was wrong).
    const c = lab({ spectrumIdx: 3, sampleT: T0 + 180_000, value: 7.0, supersedes: b.id, reason: 'sample time was 08:03, not 08:01' });
    await s.addLabValues([c]);
    // Unknown ids, other properties and other units are refused.
    expect((await refused(s.addLabValues([lab({ supersedes: 'nope', reason: 'x' })]))).status).toBe(404);
    expect((await refused(s.addLabValues([lab({ property: 'ph', supersedes: c.id, reason: 'x' })]))).message).toMatch(/same property/);
    e = await refused(s.addLabValues([lab({ spectrumIdx: 4, unit: 'mg/g' })]));
    expect(e.message).toMatch(/in "% w\/w".*this value is in "mg\/g"/);
    // "% w/w" and "%w/w" are the same unit.
    await s.addLabValues([lab({ spectrumIdx: 4, unit: '%w/w', value: 2.1 })]);

    const all = await s.listLabValues('B-1');
    expect(all.map((r) => r.id)).toEqual([a.id, b.id, c.id, all[3]!.id]);
    expect(effectiveLabValues(all).map((r) => r.value)).toEqual([7.0, 2.1]);
    const arr = labPropertyArray(all, 'moisture', 5, '% w/w');
    expect(Array.from(arr.values)).toEqual([NaN, NaN, NaN, 7.0, 2.1]);
    expect(arr.count).toBe(2);
    expect(() => labPropertyArray(all, 'moisture', 5, 'mg/g')).toThrow(/build asks for moisture in "mg\/g"/);
    await s.close();
  });

  it('store nothing when the audit record written with them fails', async () => {
    const s = new SqliteStorage({ file: ':memory:' });
    await withBatch(s);
    await expect(
      s.addLabValues([lab({ spectrumIdx: 0 }), lab({ spectrumIdx: 2 })], () => {
        throw new Error('audit trail unavailable');
      }),
    ).rejects.toThrow(/audit trail unavailable/);
    expect(await s.listLabValues('B-1')).toEqual([]);
    // Within one call, the values are checked against each other too.
    const e = await refused(s.addLabValues([lab({ spectrumIdx: 0 }), lab({ spectrumIdx: 0, value: 1 })]));
    expect(e.status).toBe(409);
    expect(await s.listLabValues('B-1')).toEqual([]);
    await s.close();
  });
});
