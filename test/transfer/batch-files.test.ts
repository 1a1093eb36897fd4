import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { readBatchCsv, writeBatchCsv } from '../../core/io/batch-csv.ts';
import { readBatchJcamp, writeBatchJcamp, fixed9 } from '../../core/io/batch-jcamp.ts';
import { ImportError } from '../../core/io/imported-batch.ts';

/** A small deterministic batch (values invented for the test; a Park–Miller style LCG for noise). */
function makeBatch(id: string, axis: number[], n: number, seed = 1) {
  let s = seed;
  const rnd = () => ((s = (s * 16807) % 2147483647) / 2147483647);
  const spectra = Array.from({ length: n }, (_, i) => Float32Array.from(axis, (x) => 0.3 + 0.2 * Math.exp(-(((x - 1450) / 40) ** 2)) * (1 - i / n) + 1e-3 * rnd() - 5e-7));
  return { id, axis: Float64Array.from(axis), times: Array.from({ length: n }, (_, i) => 1767225600000 + 10_000 * i), spectra, properties: { moisture_pct: Array.from({ length: n }, (_, i) => 20 - i) } };
}
const uniform = Array.from({ length: 40 }, (_, i) => 1000 + 10 * i);
const diodeArray = Array.from({ length: 40 }, (_, i) => 950 + 17.3 * i + 0.01 * i * i); // non-equidistant, like a diode array

function expectImportError(f: () => unknown, line: number, re: RegExp) {
  try {
    f();
  } catch (e) {
    expect(e).toBeInstanceOf(ImportError);
    expect((e as ImportError).line).toBe(line);
    expect((e as Error).message).toMatch(re);
    return;
  }
  throw new Error('expected an ImportError');
}

describe('CSV batches', () => {
  it('round-trips two batches exactly at Float32 precision', () => {
    const a = makeBatch('B-1', uniform, 12, 3);
    const b = makeBatch('B-2', uniform, 7, 5);
    const back = readBatchCsv(writeBatchCsv([a, b]), { file: 'x.csv' });
    expect(back.map((x) => x.id)).toEqual(['B-1', 'B-2']);
    for (const [orig, got] of [[a, back[0]!], [b, back[1]!]] as const) {
      expect(Array.from(got.axis)).toEqual(Array.from(orig.axis));
      expect(got.times).toEqual(orig.times);
      expect(got.properties.moisture_pct).toEqual(orig.properties.moisture_pct);
      got.spectra.forEach((s, i) => expect(Array.from(s)).toEqual(Array.from(orig.spectra[i]!)));
    }
  });

  it('reads semicolons with decimal commas, a decreasing axis with units, and seconds', () => {
    const text = '\ufefftime_s;batch;1002 nm;1001 nm;1000 nm\n0;A;0,3;0,2;0,1\n10,5;A;1,3;1,2;1,1\n';
    const [b] = readBatchCsv(text, { origin: 1000 });
    expect(Array.from(b!.axis)).toEqual([1000, 1001, 1002]);
    expect(b!.times).toEqual([1000, 11500]);
    expect(Array.from(b!.spectra[1]!)).toEqual(Array.from(Float32Array.from([1.1, 1.2, 1.3])));
  });

  it('refuses malformed files with file, line and reason', () => {
    const head = 'batch,time_s,1000,1010,1020\n';
    expectImportError(() => readBatchCsv('', { file: 'e.csv' }), 0, /e\.csv: the file is empty/);
    expectImportError(() => readBatchCsv(head, { file: 'h.csv' }), 0, /no spectra/);
    expectImportError(() => readBatchCsv(head + 'A,0,1,2,3\nA,1,1,2\n', { file: 'r.csv' }), 3, /r\.csv, line 3: 4 fields, but the header has 5/);
    expectImportError(() => readBatchCsv(head + 'A,0,1,abc,3\n'), 2, /1010 .*"abc" is not a number/);
    expectImportError(() => readBatchCsv(head + 'A,0,1,NaN,3\n'), 2, /is NaN/);
    expectImportError(() => readBatchCsv(head + 'A,5,1,2,3\nA,4,1,2,3\n'), 3, /time does not increase within batch A/);
    expectImportError(() => readBatchCsv('batch,time_s,1000,1020,1010\nA,0,1,2,3\n'), 1, /not monotone/);
    expectImportError(() => readBatchCsv('batch,time_s,9000,8000,7000\nA,0,1,2,3\n'), 1, /looks like wavenumbers/);
    expectImportError(() => readBatchCsv('batch,1000,1010\nA,1,2\n'), 1, /no time column/);
  });

  it('converts a wavenumber axis when told its unit (λ = 10⁷ / ν̃)', () => {
    const [b] = readBatchCsv('batch,time_s,8000,7000\nA,0,1,2\n', { axisUnit: 'cm-1' });
    expect(Array.from(b!.axis)).toEqual([1250, 1e7 / 7000]);
    expect(Array.from(b!.spectra[0]!)).toEqual([1, 2]);
  });
});

describe('JCAMP-DX batches (McDonald & Wilks 1988)', () => {
  it('reads a hand-written file in DIF/DUP compressed form as the specification decodes it', () => {
    // A00 = 100 (SQZ), K = +2, L = +3, % = 0 with T = repeat twice, k = −2 (DIF); YFACTOR 0.001.
    const [b] = readBatchJcamp(readFileSync(new URL('./spec-example.jdx', import.meta.url), 'utf8'), { file: 'spec-example.jdx', batch: 'S' });
    expect(Array.from(b!.axis)).toEqual([1000, 1002, 1004, 1006, 1008, 1010]);
    expect(Array.from(b!.spectra[0]!)).toEqual(Array.from(Float32Array.from([0.1, 0.102, 0.105, 0.105, 0.105, 0.103])));
    expect(b!.times).toEqual([Date.UTC(2026, 0, 15, 8, 30, 0)]);
  });

  it.each([['equidistant (X++(Y..Y))', uniform], ['diode-array axis (PEAK TABLE XY..XY)', diodeArray]])('round-trips a batch on an %s axis', (_n, axis) => {
    const a = makeBatch('J-7', axis, 5, 11);
    const text = writeBatchJcamp(a);
    expect(text.split('\n').every((l) => l.length <= 80)).toBe(true);
    const [b] = readBatchJcamp(text, { file: 'j.jdx' });
    expect(b!.id).toBe('J-7');
    expect(b!.times).toEqual(a.times);
    b!.axis.forEach((x, i) => expect(x).toBeCloseTo(axis[i]!, 9));
    b!.spectra.forEach((s, i) => expect(Array.from(s)).toEqual(Array.from(a.spectra[i]!)));
  });

  it('writes fixed notation that round-trips Float32', () => {
    for (const v of [1e-9, -3.4e-7, 0.1, 2.5, 123.456]) expect(Math.fround(Number(fixed9(v)))).toBe(Math.fround(v));
    expect(fixed9(1e-9)).not.toMatch(/e/i);
  });

  it('refuses a wrong unit, an empty file and a non-JCAMP file', () => {
    const wrong = writeBatchJcamp(makeBatch('U', uniform, 1)).replace(/NANOMETERS/g, 'SECONDS');
    expect(() => readBatchJcamp(wrong, { file: 'u.jdx' })).toThrow(/u\.jdx.*XUNITS=SECONDS/);
    expect(() => readBatchJcamp('', { file: 'e.jdx' })).toThrow(/e\.jdx: the file is empty/);
    expect(() => readBatchJcamp('hello\n1,2\n', { file: 'n.jdx' })).toThrow(/not a JCAMP-DX file/);
  });
});
