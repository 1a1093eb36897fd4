/**
 * Command-line import and export (called from server/cli.ts):
 *
 *   import --unit U --product P [--by NAME] [--delimiter ';'] [--decimal ,] [--axis-unit cm-1] [--origin ISO] FILE|DIR …
 *   export BATCH --format csv|jcamp|html|pdf [--out FILE]   (raw spectra with the lab values in force)
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
import { labPropertyColumns } from '../../core/lab/lab-values.ts';
import type { AuditTrail } from '../audit/types.ts';
import { parseSampleTime } from '../../core/lab/match.ts';
import { importBatches, type ImportFile, type ImportSummary } from './import-batches.ts';

const IMPORTABLE = /\.(csv|txt|tsv|jdx|dx|jcamp)$/i;

/**
 * Largest file one import reads, and largest import: 64 MiB each, as POST /api/import takes (a
 * batch of 500 spectra × 1,000 points is about 5 MB of CSV). A larger file is refused before it is
 * read, naming it and its size.
 */
export const MAX_IMPORT_BYTES = 64 * 1024 * 1024;

/**
 * Text of an import file: UTF-8 (a BOM is dropped), or UTF-16 with its BOM (as some Windows
 * programs save "Unicode text"). Anything else that is not valid UTF-8 — Latin-1 or Windows-1252
 * from an old export — is refused with the line of the first bad byte, not read as garbled names.
 */
export function decodeImportFile(buf: Buffer, name: string): string {
  if (buf.length >= 2 && buf[0] === 0xff && buf[1] === 0xfe) return buf.subarray(2).toString('utf16le');
  if (buf.length >= 2 && buf[0] === 0xfe && buf[1] === 0xff) {
    const le = Buffer.from(buf.subarray(2));
    le.swap16();
    return le.toString('utf16le');
  }
  try {
    return new TextDecoder('utf-8', { fatal: true }).decode(buf);
  } catch {
    let bad = 0;
    for (let lo = 0, hi = buf.length; lo < hi; ) {
      // the longest valid prefix, by bisection
      const mid = (lo + hi + 1) >> 1;
      try {
        new TextDecoder('utf-8', { fatal: true }).decode(buf.subarray(0, mid));
        lo = mid;
      } catch {
        hi = mid - 1;
      }
      bad = lo;
    }
    // (a valid prefix ends at a character boundary: a fatal decoder refuses a cut character)
    const line = buf.subarray(0, bad).toString('utf8').split(/\r\n|\r|\n/).length;
    throw new ImportError(name, line, `byte 0x${buf[bad]!.toString(16).toUpperCase().padStart(2, '0')} is not UTF-8 text (an export in Latin-1 or Windows-1252?); save the file as UTF-8`);
  }
}

export function collectFiles(paths: string[]): ImportFile[] {
  const files: ImportFile[] = [];
  let total = 0;
  for (const p of paths) {
    const st = statSync(p, { throwIfNoEntry: false });
    if (!st) throw new ImportError(p, 0, 'no such file or folder');
    const names = st.isDirectory() ? readdirSync(p).filter((n) => IMPORTABLE.test(n)).sort().map((n) => join(p, n)) : [p];
    if (st.isDirectory() && names.length === 0) throw new ImportError(p, 0, 'the folder holds no .csv, .txt, .jdx or .dx file');
    for (const f of names) {
      const size = statSync(f).size;
      total += size;
      if (size > MAX_IMPORT_BYTES) throw new ImportError(basename(f), 0, `the file is ${(size / 1048576).toFixed(1)} MiB; one import reads at most ${MAX_IMPORT_BYTES / 1048576} MiB: split it by batch`);
      if (total > MAX_IMPORT_BYTES) throw new ImportError(basename(f), 0, `with this file the import reaches ${(total / 1048576).toFixed(1)} MiB; one import reads at most ${MAX_IMPORT_BYTES / 1048576} MiB: import the files in several runs`);
      files.push({ name: basename(f), content: decodeImportFile(readFileSync(f), basename(f)) });
    }
  }
  return files;
}

/** The import summary's lab properties and warnings as lines, as the command line prints them. */
export function importPropertyLines(s: ImportSummary): string[] {
  const lines: string[] = [];
  if (s.properties.length === 0) lines.push('lab properties: none found (no column of numbers besides time, batch and the wavelengths)\n');
  for (const p of s.properties) {
    lines.push(`lab property ${p.name}${p.unit ? ` [${p.unit}]` : ' (no unit)'}: ${p.values} value(s) on ${p.batches.length} batch(es): ${p.batches.join(', ')}\n`);
  }
  for (const w of s.warnings) lines.push(`warning: ${w}\n`);
  return lines;
}

export async function runTransferCli(
  cmd: 'import' | 'export',
  positional: string[],
  flags: Record<string, string>,
  storage: Storage,
  out: (s: string) => void,
  record?: { audit: AuditTrail; actor: string },
): Promise<number> {
  if (cmd === 'import') {
    if (!flags.unit || !flags.product || positional.length === 0) {
      const missing = [!flags.unit && '--unit', !flags.product && '--product', positional.length === 0 && 'a FILE or DIR'].filter(Boolean).join(', ');
      throw new ConfigError(`import: missing ${missing}\nusage: import --unit U --product P FILE|DIR …`);
    }
    const delimiter = flags.delimiter === 'tab' ? '\t' : flags.delimiter;
    if (delimiter !== undefined && ![',', ';', '\t'].includes(delimiter)) throw new ConfigError(`--delimiter must be , ; or tab, not "${flags.delimiter}"`);
    if (flags.decimal !== undefined && !['.', ','].includes(flags.decimal)) throw new ConfigError(`--decimal must be . or , not "${flags.decimal}"`);
    if (flags['axis-unit'] !== undefined && !['nm', 'cm-1'].includes(flags['axis-unit'])) throw new ConfigError(`--axis-unit must be nm or cm-1`);
    let origin: number | undefined;
    if (flags.origin !== undefined) {
      try {
        origin = parseSampleTime(flags.origin);
      } catch (e) {
        throw new ConfigError(`--origin: ${(e as Error).message.replace(/^sample time/, 'the batch start')}`);
      }
    }
    try {
      const s = await importBatches(
        storage,
        {
          files: collectFiles(positional),
          unit: flags.unit,
          product: flags.product,
          csv: { delimiter: delimiter as ',' | ';' | '\t' | undefined, decimal: flags.decimal as '.' | ',' | undefined, axisUnit: flags['axis-unit'] as 'nm' | 'cm-1' | undefined, origin },
          user: flags.by ?? record?.actor ?? 'cli',
        },
        Date.now(),
      );
      // Audited as POST /api/import is (batch.import).
      await record?.audit.record({
        user: record.actor,
        action: 'batch.import',
        object: `unit:${flags.unit}`,
        after: { files: s.batches.map((b) => b.file), batches: s.batches.map((b) => b.id), product: s.product, ...(flags.by ? { by: flags.by } : {}) },
      });
      for (const b of s.batches) out(`imported ${b.id}: ${b.spectra} spectra${b.labValues ? `, ${b.labValues} lab values` : ''} from ${b.file}\n`);
      out(`${s.batches.length} batch(es) on a ${s.axis.points}-point axis ${s.axis.from}–${s.axis.to} nm, unit ${s.unit}\n`);
      out(importPropertyLines(s).join(''));
      return 0;
    } catch (e) {
      if (e instanceof ImportError) {
        out(`import refused, nothing was imported: ${e.message}\n`);
        return 3;
      }
      throw e;
    }
  }
  const [id, extra] = positional;
  const format = flags.format ?? 'csv';
  if (!id) throw new ConfigError('export: the batch id is missing\nusage: export BATCH --format csv|jcamp [--out FILE]');
  if (extra !== undefined) throw new ConfigError(`export: unexpected argument "${extra}" (one batch per export)\nusage: export BATCH --format csv|jcamp [--out FILE]`);
  if (!['csv', 'jcamp'].includes(format)) throw new ConfigError(`--format must be csv or jcamp (reports: GET /api/batches/${id}/report.pdf)`);
  const b = await storage.getBatch(id);
  if (!b) throw new ConfigError(`batch "${id}" does not exist`);
  const times: number[] = [];
  const spectra: Float32Array[] = [];
  for await (const s of storage.iterateSpectra(id)) {
    times.push(s.t);
    spectra.push(s.values);
  }
  const lab = labPropertyColumns(await storage.listLabValues(id), spectra.length);
  const text = format === 'csv' ? writeBatchCsv([{ id, axis: b.axis, times, spectra, ...lab }]) : writeBatchJcamp({ id, axis: b.axis, times, spectra, product: b.product, unit: b.unit, ...lab });
  if (flags.out) {
    writeFileSync(flags.out, text);
    out(`${id}: ${spectra.length} spectra written to ${flags.out}\n`);
  } else out(text);
  return 0;
}
