/**
 * Command-line import and export (called from server/cli.ts):
 *
 *   import --unit U --product P [--by NAME] [--delimiter ';'] [--decimal ,] [--axis-unit cm-1] FILE|DIR …
 *   export BATCH --format csv|jcamp|html|pdf [--out FILE]
 *
 * Import works on the database directly (server stopped or running: SQLite WAL allows both; a running
 * server sees imported batches as ended batches). A folder imports every .csv, .txt, .jdx and .dx file in
 * it, all in one transaction.
 */
import { readdirSync, readFileSync, statSync, writeFileSync } from 'node:fs';
import { basename, join } from 'node:path';
import { writeBatchCsv } from '../../core/io/batch-csv.ts';
import { writeBatchJcamp } from '../../core/io/batch-jcamp.ts';
import { ImportError } from '../../core/io/imported-batch.ts';
import { ConfigError } from '../config.ts';
import type { Storage } from '../storage/storage.ts';
import { importBatches, type ImportFile } from './import-batches.ts';

const IMPORTABLE = /\.(csv|txt|tsv|jdx|dx|jcamp)$/i;

export function collectFiles(paths: string[]): ImportFile[] {
  const files: ImportFile[] = [];
  for (const p of paths) {
    const st = statSync(p, { throwIfNoEntry: false });
    if (!st) throw new ImportError(p, 0, 'no such file or folder');
    const names = st.isDirectory() ? readdirSync(p).filter((n) => IMPORTABLE.test(n)).sort().map((n) => join(p, n)) : [p];
    if (st.isDirectory() && names.length === 0) throw new ImportError(p, 0, 'the folder holds no .csv, .txt, .jdx or .dx file');
    for (const f of names) files.push({ name: basename(f), content: readFileSync(f, 'utf8') });
  }
  return files;
}

export async function runTransferCli(cmd: 'import' | 'export', positional: string[], flags: Record<string, string>, storage: Storage, out: (s: string) => void): Promise<number> {
  if (cmd === 'import') {
    if (!flags.unit || !flags.product || positional.length === 0) throw new ConfigError('usage: import --unit U --product P FILE|DIR …');
    const delimiter = flags.delimiter === 'tab' ? '\t' : flags.delimiter;
    if (delimiter !== undefined && ![',', ';', '\t'].includes(delimiter)) throw new ConfigError(`--delimiter must be , ; or tab, not "${flags.delimiter}"`);
    if (flags.decimal !== undefined && !['.', ','].includes(flags.decimal)) throw new ConfigError(`--decimal must be . or , not "${flags.decimal}"`);
    if (flags['axis-unit'] !== undefined && !['nm', 'cm-1'].includes(flags['axis-unit'])) throw new ConfigError(`--axis-unit must be nm or cm-1`);
    try {
      const s = await importBatches(
        storage,
        {
          files: collectFiles(positional),
          unit: flags.unit,
          product: flags.product,
          csv: { delimiter: delimiter as ',' | ';' | '\t' | undefined, decimal: flags.decimal as '.' | ',' | undefined, axisUnit: flags['axis-unit'] as 'nm' | 'cm-1' | undefined },
          user: flags.by ?? process.env.USER ?? 'cli',
        },
        Date.now(),
      );
      for (const b of s.batches) out(`imported ${b.id}: ${b.spectra} spectra from ${b.file}\n`);
      out(`${s.batches.length} batch(es) on a ${s.axis.points}-point axis ${s.axis.from}–${s.axis.to} nm, unit ${s.unit}\n`);
      return 0;
    } catch (e) {
      if (e instanceof ImportError) {
        out(`import refused, nothing was imported: ${e.message}\n`);
        return 3;
      }
      throw e;
    }
  }
  const [id] = positional;
  const format = flags.format ?? 'csv';
  if (!id) throw new ConfigError('usage: export BATCH --format csv|jcamp [--out FILE]');
  if (!['csv', 'jcamp'].includes(format)) throw new ConfigError(`--format must be csv or jcamp (reports: GET /api/batches/${id}/report.pdf)`);
  const b = await storage.getBatch(id);
  if (!b) throw new ConfigError(`batch "${id}" does not exist`);
  const times: number[] = [];
  const spectra: Float32Array[] = [];
  for await (const s of storage.iterateSpectra(id)) {
    times.push(s.t);
    spectra.push(s.values);
  }
  const text = format === 'csv' ? writeBatchCsv([{ id, axis: b.axis, times, spectra, properties: {} }]) : writeBatchJcamp({ id, axis: b.axis, times, spectra, product: b.product, unit: b.unit });
  if (flags.out) {
    writeFileSync(flags.out, text);
    out(`${id}: ${spectra.length} spectra written to ${flags.out}\n`);
  } else out(text);
  return 0;
}
