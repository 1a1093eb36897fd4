/**
 * The server parses an import in a worker thread of its own (so a large file does not hold back
 * acks and the monitor on the main thread): the worker must give exactly what the inline parser
 * gives — batches, times, float32 values bit for bit, lab values with their units, warnings — and
 * refuse a bad file with the same file, line and reason.
 */
import { describe, expect, it } from 'vitest';
import { writeBatchJcamp } from '../../core/io/batch-jcamp.ts';
import { ImportError } from '../../core/io/imported-batch.ts';
import { parseImportFiles, parseImportFilesInWorker } from '../../server/transfer/import-batches.ts';

const T0 = Date.UTC(2026, 0, 5, 8, 0, 0);
const NOW = Date.UTC(2026, 5, 1);

const csv = [
  'batch,time_ms,moisture [% w/w],operator,1000,1010,1020',
  `C-1,${T0},18.2,anna,0.41,0.42,0.43`,
  `C-1,${T0 + 10_000},,anna,0.40,0.415,0.425`,
  `C-2,${T0 + 20_000},12.5,ben,0.1234567,0.2,0.3`,
].join('\r\n');
const jdx = writeBatchJcamp({ id: 'J-1', axis: Float64Array.from([1000, 1010, 1020]), times: [T0, T0 + 10_000], spectra: [Float32Array.from([1, 2, 3]), Float32Array.from([1.5, 2.5, 3.5])], product: 'granule' });

describe('import parsed in a worker thread', () => {
  it('gives what the inline parser gives, value for value', async () => {
    for (const files of [[{ name: 'site.csv', content: csv }], [{ name: 'J-1.jdx', content: jdx }]]) {
      const inline = parseImportFiles({ files }, NOW);
      const worker = await parseImportFilesInWorker({ files }, NOW);
      expect(worker.warnings).toEqual(inline.warnings);
      expect([...worker.resampled]).toEqual([...inline.resampled]);
      expect(worker.batches.length).toBe(inline.batches.length);
      worker.batches.forEach((b, i) => {
        const a = inline.batches[i]!;
        expect(b.axis).toBeInstanceOf(Float64Array);
        expect(b.spectra[0]).toBeInstanceOf(Float32Array);
        expect({ ...b, axis: [...b.axis], spectra: b.spectra.map((s) => [...s]) }).toEqual({ ...a, axis: [...a.axis], spectra: a.spectra.map((s) => [...s]) });
      });
    }
  }, 60_000);

  it('refuses a bad file with the same file, line and reason', async () => {
    const bad = [{ name: 'bad.csv', content: csv.replace('0.2,0.3', '1e39,0.3') }];
    let inline: unknown;
    try {
      parseImportFiles({ files: bad }, NOW);
    } catch (e) {
      inline = e;
    }
    expect(inline).toBeInstanceOf(ImportError);
    const worker = await parseImportFilesInWorker({ files: bad }, NOW).then(
      () => null,
      (e: unknown) => e,
    );
    expect(worker).toBeInstanceOf(ImportError);
    expect(worker).toMatchObject({ file: 'bad.csv', line: 4, reason: (inline as ImportError).reason });
    expect((worker as ImportError).reason).toMatch(/float32/);
  }, 60_000);
});
