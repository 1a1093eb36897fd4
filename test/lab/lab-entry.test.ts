/**
 * Lab results that arrive after a batch, through REST (POST/GET /api/batches/:batch/lab-values) and
 * the command line (lab add, lab import, lab list): matched to the spectrum nearest the sample time
 * within the stated tolerance (refused beyond it, naming both times), never overwriting (409 naming
 * the value there; a correction supersedes it with a reason), one unit per property, role operator
 * or above, every stored value audited.
 */
import { spawnSync } from 'node:child_process';
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { readBatchCsv } from '../../core/io/batch-csv.ts';
import { login, startTestServer, type Session, type TestServer } from '../server/helpers.ts';

let ts: TestServer;
let owner: Session;
let operator: Session;
let viewer: Session;
const T0 = Date.UTC(2026, 2, 2, 8, 0, 0);
const iso = (t: number) => new Date(t).toISOString();

/** A site-shaped batch file: elapsed seconds every 30 s, no lab column. */
function batchCsv(id: string, n: number): string {
  const rows = ['batch,time_s,1100.01,1102.52,1105.04'];
  for (let i = 0; i < n; i++) rows.push(`${id},${30 * i},${(0.5 - 0.001 * i).toFixed(5)},0.40000,0.30000`);
  return rows.join('\n') + '\n';
}

beforeAll(async () => {
  ts = await startTestServer({ lab: { matchToleranceMs: 60_000 } }, { units: ['dryer-1'] });
  owner = await login(ts, 'model-owner');
  operator = await login(ts, 'operator');
  viewer = await login(ts, 'viewer');
  const r = await owner.post('/api/import', { unit: 'dryer-1', product: 'granule', files: [{ name: 'L-1.csv', content: batchCsv('L-1', 40) }, { name: 'L-2.csv', content: batchCsv('L-2', 20) }], csv: { origin: T0 } });
  expect(r.status, JSON.stringify(r.body)).toBe(201);
  expect(r.body.properties).toEqual([]);
}, 120_000);
afterAll(async () => {
  await ts?.stop();
});

describe('POST /api/batches/:batch/lab-values', () => {
  it('attaches a result to the nearest spectrum, refuses beyond the tolerance, never overwrites, corrects with a reason', async () => {
    const url = '/api/batches/L-1/lab-values';
    expect((await viewer.post(url, { property: 'moisture', value: 6.3, unit: '% w/w', sampleT: iso(T0 + 600_000) })).status).toBe(403);

    // 10 min 10 s after the start: spectrum 20 (10:00) is 10 s away, spectrum 21 (10:30) 20 s.
    let r = await operator.post(url, { property: 'Moisture', value: 6.3, unit: '% w/w', sampleT: iso(T0 + 610_000), method: 'LOD' });
    expect(r.status, JSON.stringify(r.body)).toBe(201);
    expect(r.body).toMatchObject({ batch: 'L-1', property: 'moisture', value: 6.3, unit: '% w/w', spectrumIdx: 20, spectrumDtMs: 10_000, spectrumT: T0 + 600_000, method: 'LOD', source: 'entry', enteredBy: 'u-operator', effective: true });
    const first = r.body.id as string;

    // ms epoch works too; the next spectrum.
    r = await operator.post(url, { property: 'moisture', value: 5.9, unit: '%w/w', sampleT: T0 + 631_000 });
    expect(r.status, JSON.stringify(r.body)).toBe(201);
    expect(r.body.spectrumIdx).toBe(21);

    // 25 min after the last spectrum (19:30): beyond the 60 s tolerance, both times named.
    r = await operator.post(url, { property: 'moisture', value: 1.1, unit: '% w/w', sampleT: iso(T0 + 19.5 * 60_000 + 25 * 60_000) });
    expect(r.status).toBe(422);
    expect(r.body.detail).toBe(
      `batch L-1: sample time ${iso(T0 + 44.5 * 60_000)} is 25.0 min from the nearest spectrum (${iso(T0 + 19.5 * 60_000)}, spectrum 39, after the last spectrum); the match tolerance is 1.0 min (lab.matchToleranceMs) — check the sample time and the batch`,
    );
    expect(r.body.errors[0].path).toBe('body.sampleT');

    // A second value on spectrum 20: refused, naming the value there.
    r = await operator.post(url, { property: 'moisture', value: 6.0, unit: '% w/w', sampleT: iso(T0 + 595_000) });
    expect(r.status).toBe(409);
    expect(r.body.detail).toContain(`batch L-1 already has moisture 6.3 % w/w sampled ${iso(T0 + 610_000)} at spectrum 20 (id ${first}); a value is never overwritten — to correct it, give supersedes=${first} and a reason`);

    // Another unit for the same property of the batch: refused.
    r = await operator.post(url, { property: 'moisture', value: 60, unit: 'mg/g', sampleT: iso(T0 + 300_000) });
    expect(r.status).toBe(422);
    expect(r.body.detail).toMatch(/holds moisture in "% w\/w".*this value is in "mg\/g"/);

    // A correction without a reason is refused by the schema; with one it supersedes.
    r = await operator.post(url, { property: 'moisture', value: 6.0, unit: '% w/w', sampleT: iso(T0 + 610_000), supersedes: first });
    expect(r.status).toBe(400);
    expect(JSON.stringify(r.body.errors)).toContain('a correction (supersedes) needs a reason');
    r = await operator.post(url, { property: 'moisture', value: 6.0, unit: '% w/w', sampleT: iso(T0 + 610_000), method: 'LOD', supersedes: first, reason: 'transcription error: the balance read 6.0' });
    expect(r.status, JSON.stringify(r.body)).toBe(201);
    const fix = r.body.id as string;
    // The corrected value cannot be corrected twice.
    r = await operator.post(url, { property: 'moisture', value: 6.1, unit: '% w/w', sampleT: iso(T0 + 610_000), supersedes: first, reason: 'again' });
    expect(r.status).toBe(409);
    expect(r.body.detail).toContain(`was already corrected by ${fix}`);
    // Unknown batch.
    expect((await operator.post('/api/batches/NOPE/lab-values', { property: 'moisture', value: 1, unit: '%', sampleT: T0 })).status).toBe(404);

    const list = await viewer.get(url);
    expect(list.status).toBe(200);
    expect(list.body.matchToleranceMs).toBe(60_000);
    expect(list.body.items.map((v: any) => [v.value, v.effective, v.supersededBy])).toEqual([[6.3, false, fix], [5.9, true, null], [6.0, true, null]]);
    expect(list.body.properties).toEqual([{ name: 'moisture', unit: '% w/w', values: 2 }]);

    const audit = await viewer.get('/api/audit?action=lab-value.&object=batch:L-1');
    expect(audit.body.items.map((a: any) => [a.action, a.user, JSON.parse(a.after).value])).toEqual([['lab-value.add', 'u-operator', 6.3], ['lab-value.add', 'u-operator', 5.9], ['lab-value.correct', 'u-operator', 6.0]]);
    expect(JSON.parse(audit.body.items[2].before).id).toBe(first);
    expect(audit.body.items[2].reason).toBe('transcription error: the balance read 6.0');
  }, 120_000);

  it('refuses a unit, method or reason holding a bidirectional override or an escape, naming the field; nothing stored', async () => {
    const url = '/api/batches/L-2/lab-values';
    const before = (await viewer.get(url)).body.items.length as number;
    const base = { property: 'moisture', value: 4.1, unit: '% w/w', sampleT: iso(T0 + 300_000) };
    for (const [body, field, what] of [
      [{ ...base, unit: '%\u202e w/w' }, 'unit', /bidirectional control character \(U\+202E\)/],
      [{ ...base, method: 'LOD\u001b[2J' }, 'method', /escape character \(U\+001B\)/],
      [{ ...base, method: 'LOD\u2066' }, 'method', /bidirectional control character \(U\+2066\)/],
    ] as const) {
      const r = await operator.post(url, body);
      expect(r.status, JSON.stringify(r.body)).toBe(422);
      expect(JSON.stringify(r.body)).toMatch(new RegExp(`the ${field} holds`));
      expect(JSON.stringify(r.body)).toMatch(what);
    }
    const after = (await viewer.get(url)).body.items.length as number;
    expect(after).toBe(before);
  }, 60_000);
});

describe('exports carry the lab values', () => {
  it('CSV and JCAMP-DX exports import back with the same values on the same spectra', async () => {
    const inForce = async (batch: string) =>
      ((await viewer.get(`/api/batches/${batch}/lab-values`)).body.items as any[]).filter((v) => v.effective).map((v) => [v.property, v.spectrumIdx, v.value, v.unit]).sort();
    const want = await inForce('L-1');
    expect(want).toEqual([['moisture', 20, 6.0, '% w/w'], ['moisture', 21, 5.9, '% w/w']]);

    const csv = (await viewer.get('/api/batches/L-1/export.csv')).body as string;
    expect(csv.split('\r\n')[0]!.startsWith('seq,t_ms,time_utc,moisture [% w/w],nm_1100.01')).toBe(true);
    let r = await owner.post('/api/import', { unit: 'dryer-1', product: 'granule', files: [{ name: 'L-1-csv.csv', content: csv }] });
    expect(r.status, JSON.stringify(r.body)).toBe(201);
    expect(r.body.properties).toEqual([{ name: 'moisture', unit: '% w/w', values: 2, batches: ['L-1-csv'] }]);
    expect(await inForce('L-1-csv')).toEqual(want);

    const jdx = (await viewer.get('/api/batches/L-1/export.jdx')).body as string;
    expect(jdx).toContain('##$LAB moisture=6\n##$LAB moisture UNIT=% w/w\n');
    r = await owner.post('/api/import', { unit: 'dryer-1', product: 'granule', files: [{ name: 'rt.jdx', content: jdx.replaceAll('L-1', 'L-1-jdx') }] });
    expect(r.status, JSON.stringify(r.body)).toBe(201);
    expect(await inForce('L-1-jdx')).toEqual(want);
    // The record keeps what the export cannot: the original sample time and method stay with L-1.
    const back = ((await viewer.get('/api/batches/L-1-jdx/lab-values')).body.items as any[])[0];
    expect(back).toMatchObject({ source: 'import', spectrumDtMs: 0, method: null });
  }, 120_000);
});

describe('lab add / lab import / lab list on the command line', () => {
  const cli = (args: string[]) => spawnSync(process.execPath, ['--import', 'tsx', 'server/cli.ts', ...args, '--data-dir', ts.dir], { encoding: 'utf8', env: { ...process.env, TIDELINE_LAB_MATCH_TOLERANCE_MS: '60000' } });
  it('adds, imports a lab sheet whole or not at all, and lists', () => {
    let r = cli(['lab', 'add', 'L-2', '--property', 'moisture', '--value', '3.4', '--unit', '% w/w', '--at', iso(T0 + 301_000), '--method', 'LOD', '--by', 'lab.analyst']);
    expect(r.stderr).toBe('');
    expect(r.stdout).toMatch(new RegExp(`^L-2: moisture 3.4 % w/w sampled ${iso(T0 + 301_000)} → spectrum 10 at ${iso(T0 + 300_000)} \\(1.0 s apart\\); id [0-9a-f-]{36}\\n1 lab value\\(s\\) stored on 1 batch\\(es\\) by lab.analyst\\n$`));
    expect(r.status).toBe(0);

    // A lab sheet with one line beyond the batch: nothing is stored, the line is named.
    const sheet = join(ts.dir, 'lab-sheet.csv');
    writeFileSync(sheet, `batch,sample_time,moisture [% w/w],method\nL-2,${iso(T0 + 120_000)},8.8,LOD\nL-2,${iso(T0 + 3_600_000)},0.9,LOD\n`);
    r = cli(['lab', 'import', sheet]);
    expect(r.status).toBe(3);
    expect(r.stdout).toContain(`lab import refused, nothing was stored: lab-sheet.csv, line 3: batch L-2: sample time ${iso(T0 + 3_600_000)} is 50.5 min from the nearest spectrum`);
    // A non-numeric cell: file, line, column.
    writeFileSync(sheet, `batch,sample_time,moisture [% w/w],method\nL-2,${iso(T0 + 120_000)},8.8,LOD\nL-2,${iso(T0 + 500_000)},n.d.,LOD\nL-2,${iso(T0 + 540_000)},2.1,LOD\n`);
    r = cli(['lab', 'import', sheet]);
    expect(r.stdout).toBe('lab import refused, nothing was stored: lab-sheet.csv, line 3: column "moisture [% w/w]" holds "n.d.", which is not a number, among 2 numbers; leave the cell empty where there is no value\n');
    writeFileSync(sheet, `batch,elapsed_min,moisture [% w/w],method,analyst\nL-2,2,8.8,LOD,kim\nL-2,9,2.1,LOD,kim\n`);
    r = cli(['lab', 'import', sheet, '--by', 'lab.analyst']);
    expect(r.status, r.stdout + r.stderr).toBe(0);
    expect(r.stdout).toContain('warning: lab-sheet.csv: column 5 "analyst" holds text (e.g. "kim"); not used\n');
    expect(r.stdout).toContain('2 lab value(s) stored on 1 batch(es) by lab.analyst\n');
    // The same sheet again: refused, the value already there named (never overwritten).
    r = cli(['lab', 'import', sheet]);
    expect(r.status).toBe(3);
    expect(r.stdout).toMatch(/lab-sheet\.csv, line 2: batch L-2 already has moisture 8\.8 % w\/w .* at spectrum 4 /);

    r = cli(['lab', 'list', 'L-2']);
    expect(r.status).toBe(0);
    expect(r.stdout.trimEnd().split('\n').map((l) => l.replace(/^[0-9a-f-]{36}  /, ''))).toEqual([
      `moisture 3.4 % w/w  sampled ${iso(T0 + 301_000)} (5.0 min)  spectrum 10  entry LOD by lab.analyst`,
      `moisture 8.8 % w/w  sampled ${iso(T0 + 120_000)} (2.0 min)  spectrum 4  entry LOD by lab.analyst`,
      `moisture 2.1 % w/w  sampled ${iso(T0 + 540_000)} (9.0 min)  spectrum 18  entry LOD by lab.analyst`,
      'moisture [% w/w]: 3 value(s) in force',
    ]);
    // The command line's export carries them too, and imports back with the same values.
    const out = join(ts.dir, 'L-2-out.csv');
    r = cli(['export', 'L-2', '--format', 'csv', '--out', out]);
    expect(r.status, r.stdout + r.stderr).toBe(0);
    const [back] = readBatchCsv(readFileSync(out, 'utf8'), { file: 'L-2-out.csv' });
    expect(back!.propertyUnits).toEqual({ moisture: '% w/w' });
    expect(back!.properties.moisture!.flatMap((v, i) => (Number.isNaN(v) ? [] : [[i, v]]))).toEqual([[4, 8.8], [10, 3.4], [18, 2.1]]);
    r = cli(['lab', 'add', 'L-2', '--property', 'moisture', '--value', 'dry', '--unit', '%', '--at', iso(T0)]);
    expect(r.status).toBe(2);
    expect(r.stderr).toContain('lab add: --value "dry" is not a number');
  }, 240_000);
});
