/**
 * Lab columns of imported files become lab values: every numeric non-spectral column of a CSV is a
 * per-spectrum property with its name and unit read from the header (sparse: an empty cell is no
 * value), JCAMP-DX carries them in `##$LAB name` labels; the import stores them with the spectra in
 * one transaction (source 'import') and its summary lists them and warns about columns it does not
 * use. Checked through the command line on site-shaped files (wavelengths with 2 decimals, elapsed
 * seconds, a moisture column filled on a few rows, text columns beside it).
 */
import { spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { readBatchCsv, writeBatchCsv } from '../../core/io/batch-csv.ts';
import { readBatchJcamp, writeBatchJcamp } from '../../core/io/batch-jcamp.ts';
import { ImportError } from '../../core/io/imported-batch.ts';
import { parsePropertyHeader } from '../../core/lab/property-header.ts';
import { SqliteStorage } from '../../server/storage/sqlite-storage.ts';

const dir = mkdtempSync(join(tmpdir(), 'tideline-labcol-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));
const cli = (args: string[]) => spawnSync(process.execPath, ['--import', 'tsx', 'server/cli.ts', ...args], { encoding: 'utf8' });

function refusal(f: () => unknown): ImportError {
  try {
    f();
  } catch (e) {
    expect(e).toBeInstanceOf(ImportError);
    return e as ImportError;
  }
  throw new Error('expected an ImportError');
}

/** A site-shaped file: batch, elapsed seconds, a sparse moisture column, wavelengths written with 2 decimals. */
function siteCsv(batch: string, n: number, lab: Record<number, number>, opts: { header?: string; extra?: [string, (i: number) => string] } = {}): string {
  const axis = Array.from({ length: 6 }, (_, j) => (1100.004 + 3.333 * j).toFixed(2));
  const head = ['batch', 'time_s', opts.header ?? 'moisture [% w/w]', ...(opts.extra ? [opts.extra[0]] : []), ...axis];
  const rows = [head.join(',')];
  for (let i = 0; i < n; i++) {
    const spec = axis.map((_, j) => (0.4 + 0.01 * j - 0.002 * i).toFixed(5));
    rows.push([batch, String(30 * i), i in lab ? String(lab[i]) : '', ...(opts.extra ? [opts.extra[1](i)] : []), ...spec].join(','));
  }
  return rows.join('\n') + '\n';
}

describe('property headers', () => {
  it.each([
    ['moisture [% w/w]', 'moisture', '% w/w'],
    ['Moisture (% w/w)', 'moisture', '% w/w'],
    ['moisture_pct', 'moisture', '%'],
    ['moisture_percent', 'moisture', '%'],
    ['moisture %', 'moisture', '%'],
    ['moisture_%', 'moisture', '%'],
    ['water_ppm', 'water', 'ppm'],
    ['LOD moisture (oven) [%]', 'lod_moisture_oven', '%'],
    ['bulk_density', 'bulk_density', ''],
    ['moisture []', 'moisture', ''],
  ])('%s → %s in "%s"', (h, name, unit) => {
    expect(parsePropertyHeader(h)).toEqual({ name, unit });
  });
  it('a header that names no property says why', () => {
    expect(parsePropertyHeader('[%]')).toHaveProperty('problem');
    expect(parsePropertyHeader('2nd_cut')).toHaveProperty('problem');
  });
});

describe('CSV lab columns', () => {
  it('keeps numeric columns as sparse properties with name and unit; warns about the columns it does not use', () => {
    const warnings: string[] = [];
    const text = 'batch,seq,time_s,moisture [% w/w],operator,notes,2nd_cut,1000.00,1003.33,1006.67\n' +
      'A,1,0,,anna,,1,0.1,0.2,0.3\n' +
      'A,2,30,12.5,anna,,2,0.1,0.2,0.3\n' +
      'A,3,60,,bert,,3,0.1,0.2,0.3\n' +
      'A,4,90,4.25,bert,,4,0.1,0.2,0.3\n';
    const [b] = readBatchCsv(text, { file: 's.csv', origin: Date.UTC(2026, 0, 5), warnings });
    expect(Object.keys(b!.properties)).toEqual(['moisture']);
    expect(b!.propertyUnits).toEqual({ moisture: '% w/w' });
    expect(b!.properties.moisture).toEqual([NaN, 12.5, NaN, 4.25]);
    expect(warnings).toEqual([
      's.csv: column 2 "seq" is a row count; not used',
      's.csv: column 5 "operator" holds text (e.g. "anna"), not numbers; not used',
      's.csv: column 6 "notes" has no value in any row; not used',
      's.csv: column 7 "2nd_cut" holds numbers but "2nd_cut" is not a property name (it must start with a letter; letters, digits, _ . - up to 64); not used',
    ]);
  });

  it('refuses bad lab cells and clashing columns with file, line, column and reason', () => {
    let e = refusal(() => readBatchCsv('batch,time_s,moisture_pct,1000,1010\nA,0,,1,2\nA,30,5.1,1,2\nA,60,<0.5,1,2\nA,90,3.2,1,2\n', { file: 'm.csv' }));
    expect(e.line).toBe(4);
    expect(e.message).toBe('m.csv, line 4: column 3 "moisture_pct" holds "<0.5", which is not a number, among 2 numbers; leave the cell empty where there is no lab value');
    e = refusal(() => readBatchCsv('batch,time_s,moisture_pct,moisture [%],1000,1010\nA,0,1,1,1,2\n', { file: 'd.csv' }));
    expect(e.message).toBe('d.csv, line 1: column 3 "moisture_pct" and column 4 "moisture [%]" both name the property moisture');
  });

  it('reads decimal commas in lab cells, and a file without an origin is told its times start in 1970', () => {
    const warnings: string[] = [];
    const [b] = readBatchCsv('batch;time_min;moisture [% w/w];1000;1010\nA;0;;0,1;0,2\nA;1;2,5;0,1;0,2\n', { file: 'c.csv', warnings });
    expect(b!.properties.moisture).toEqual([NaN, 2.5]);
    expect(warnings).toEqual(['c.csv: times are elapsed minutes ("time_min") and no origin was given: the batches are placed after 1970-01-01T00:00:00Z; give the batch start (import --origin) to store real times']);
  });

  it('round-trips sparse properties with their units through CSV and JCAMP-DX', () => {
    const axis = Float64Array.from([1000, 1010, 1020]);
    const batch = {
      id: 'R-1', axis, times: [1767225600000, 1767225630000, 1767225660000],
      spectra: [Float32Array.of(0.1, 0.2, 0.3), Float32Array.of(0.2, 0.3, 0.4), Float32Array.of(0.3, 0.4, 0.5)],
      properties: { moisture: [NaN, 6.31, 1.2345678901234], density: [0.5, NaN, NaN], moisture_pct: [NaN, NaN, 7] },
      propertyUnits: { moisture: '% w/w', density: 'g/mL, tapped', moisture_pct: '' },
    };
    for (const back of [readBatchCsv(writeBatchCsv([batch]), { file: 'r.csv' })[0]!, readBatchJcamp(writeBatchJcamp(batch), { file: 'r.jdx' })[0]!]) {
      expect(back.properties).toEqual(batch.properties);
      expect(back.propertyUnits).toEqual(batch.propertyUnits);
    }
  });

  it('refuses a JCAMP-DX lab label that is not a number, or a unit that changes within a batch', () => {
    const base = { id: 'J', axis: Float64Array.from([1000, 1010]), times: [1, 2], spectra: [Float32Array.of(1, 2), Float32Array.of(1, 2)] };
    let text = writeBatchJcamp({ ...base, properties: { moisture: [5, 4] }, propertyUnits: { moisture: '%' } });
    expect(refusal(() => readBatchJcamp(text.replace('##$LAB moisture=4', '##$LAB moisture=n.d.'), { file: 'j.jdx' })).message).toBe('j.jdx: block 2 ("J spectrum 2"): ##$LAB moisture=n.d. is not a number');
    text = text.replace(/(##\$LAB moisture=4\n##\$LAB moisture UNIT=)%/, '$1% w/w');
    expect(refusal(() => readBatchJcamp(text, { file: 'j.jdx' })).message).toBe('j.jdx: block 2 ("J spectrum 2"): ##$LAB moisture UNIT=% w/w, but earlier blocks of batch J give moisture in "%"; one property has one unit');
  });
});

describe('import on the command line', () => {
  it('stores the lab values with the spectra, lists them, warns, and refuses a unit conflict across files', async () => {
    const d = join(dir, 'cli');
    const data = ['--data-dir', d];
    mkdirSync(join(d, 'site'), { recursive: true });
    expect(cli(['unit', 'add', 'dryer-3', '--kind', 'dryer', ...data]).status).toBe(0);
    writeFileSync(join(d, 'site', 'S-01.csv'), siteCsv('S-01', 12, { 2: 14.2, 6: 6.1, 10: 1.8 }, { extra: ['operator', (i) => (i < 6 ? 'anna' : 'bert')] }));
    writeFileSync(join(d, 'site', 'S-02.csv'), siteCsv('S-02', 10, { 3: 11.9, 8: 2.2 }, { extra: ['operator', () => 'carl'] }));
    let r = cli(['import', '--unit', 'dryer-3', '--product', 'granule B', '--origin', '2026-03-02T08:00:00Z', ...data, join(d, 'site')]);
    expect(r.stderr).toBe('');
    expect(r.status).toBe(0);
    expect(r.stdout).toContain('imported S-01: 12 spectra, 3 lab values from S-01.csv\n');
    expect(r.stdout).toContain('imported S-02: 10 spectra, 2 lab values from S-02.csv\n');
    expect(r.stdout).toContain('lab property moisture [% w/w]: 5 value(s) on 2 batch(es): S-01, S-02\n');
    expect(r.stdout).toContain('warning: S-01.csv: column 4 "operator" holds text (e.g. "anna"), not numbers; not used\n');

    const s = new SqliteStorage({ file: join(d, 'tideline.db') });
    try {
      const b = (await s.getBatch('S-01'))!;
      expect(b.startT).toBe(Date.UTC(2026, 2, 2, 8));
      const lab = await s.listLabValues('S-01');
      expect(lab.map((v) => [v.spectrumIdx, v.value, v.unit, v.source, v.sampleT, v.spectrumDtMs])).toEqual([
        [2, 14.2, '% w/w', 'import', Date.UTC(2026, 2, 2, 8, 1), 0],
        [6, 6.1, '% w/w', 'import', Date.UTC(2026, 2, 2, 8, 3), 0],
        [10, 1.8, '% w/w', 'import', Date.UTC(2026, 2, 2, 8, 5), 0],
      ]);
    } finally {
      await s.close();
    }

    // moisture in "%" beside moisture in "% w/w": refused whole, naming both files.
    mkdirSync(join(d, 'mixed'));
    writeFileSync(join(d, 'mixed', 'S-03.csv'), siteCsv('S-03', 5, { 1: 9 }));
    writeFileSync(join(d, 'mixed', 'S-04.csv'), siteCsv('S-04', 5, { 1: 9 }, { header: 'moisture_pct' }));
    r = cli(['import', '--unit', 'dryer-3', '--product', 'granule B', '--origin', '2026-03-03T08:00:00Z', ...data, join(d, 'mixed')]);
    expect(r.status).toBe(3);
    expect(r.stdout).toBe('import refused, nothing was imported: S-04.csv, line 2: batch S-04 gives moisture in "%", but S-03.csv (batch S-03) gives it in "% w/w"; one property has one unit — convert one of them, or name them apart\n');
    // A bad lab cell: file, line, column and reason.
    writeFileSync(join(d, 'bad.csv'), siteCsv('S-05', 5, { 1: 9, 3: 4 }).replace(/^S-05,60,,/m, 'S-05,60,dry,'));
    r = cli(['import', '--unit', 'dryer-3', '--product', 'granule B', ...data, join(d, 'bad.csv')]);
    expect(r.stdout).toBe('import refused, nothing was imported: bad.csv, line 4: column 3 "moisture [% w/w]" holds "dry", which is not a number, among 2 numbers; leave the cell empty where there is no lab value\n');
    r = cli(['import', '--unit', 'dryer-3', '--product', 'granule B', '--origin', 'yesterday', ...data, join(d, 'bad.csv')]);
    expect(r.status).toBe(2);
    expect(r.stderr).toMatch(/--origin: the batch start "yesterday" is not an ISO 8601 date-time/);
  }, 240_000);
});
