/**
 * Import historical batches (CSV or JCAMP-DX) into the record, all files of one import in one
 * transaction: either every batch is stored or none is.
 *
 * Imported batches are stored like streamed ones (as ended batches) under the pseudo-analyzer
 * `file-import`, with the import's start time as its boot epoch and seq counting through the import.
 * With a target axis (a model's input axis), each spectrum is resampled onto it by linear
 * interpolation (core/preprocess 'resample' step, which refuses to extrapolate); a file whose range
 * does not cover the target is refused with its name.
 */
import { randomUUID } from 'node:crypto';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { Worker } from 'node:worker_threads';
import { readBatchCsv, type CsvReadOptions } from '../../core/io/batch-csv.ts';
import { readBatchJcamp } from '../../core/io/batch-jcamp.ts';
import { ImportError, type ImportedBatch } from '../../core/io/imported-batch.ts';
import { idProblem, textProblem } from '../../core/io/names.ts';
import { matrixFromRows } from '../../core/linalg/dense-matrix.ts';
import { fitChain } from '../../core/preprocess/index.ts';
import { emptyIngestWrite, type LabValueRow, type Storage } from '../storage/storage.ts';

export const IMPORT_ANALYZER = 'file-import';

export type ImportFormat = 'csv' | 'jcamp';

export interface ImportFile {
  name: string;
  content: string;
  format?: ImportFormat;
}

export interface ImportRequest {
  files: ImportFile[];
  unit: string;
  product: string;
  csv?: Omit<CsvReadOptions, 'file'>;
  /** Resample every spectrum onto this axis (nm); else all batches must share one axis. */
  targetAxis?: ArrayLike<number>;
  user: string;
}

export interface ImportSummary {
  importId: number;
  unit: string;
  product: string;
  batches: { id: string; spectra: number; file: string; from: number; to: number; resampled: boolean; labValues: number }[];
  axis: { points: number; from: number; to: number };
  /**
   * Lab properties found in the files' columns (CSV) or labels (JCAMP-DX), stored as lab values
   * (source 'import') on their spectra: name, unit, how many values, on which batches.
   */
  properties: { name: string; unit: string; values: number; batches: string[] }[];
  /** What the import read past: columns it does not use, times without an origin, … */
  warnings: string[];
}

export function formatOf(file: ImportFile): ImportFormat {
  if (file.format) return file.format;
  if (/\.(jdx|dx|jcamp|jcm)$/i.test(file.name)) return 'jcamp';
  if (/\.(csv|txt|tsv)$/i.test(file.name)) return 'csv';
  if (/^\s*##TITLE=/m.test(file.content.slice(0, 2000))) return 'jcamp';
  return 'csv';
}

/** Parse the files (pure). Throws ImportError naming file, line and reason. */
export function parseImportFiles(req: Pick<ImportRequest, 'files' | 'csv' | 'targetAxis'>, now?: number): { batches: ImportedBatch[]; resampled: Set<string>; warnings: string[] } {
  if (req.files.length === 0) throw new ImportError('import', 0, 'no files were given');
  const batches: ImportedBatch[] = [];
  const warnings: string[] = [];
  for (const f of req.files) {
    const nul = f.content.indexOf('\u0000');
    if (nul >= 0) {
      const line = f.content.slice(0, nul).split(/\r\n|\r|\n/).length;
      throw new ImportError(f.name, line, 'the file holds NUL characters: it is binary, or text in UTF-16 or UTF-32; save it as UTF-8 text');
    }
    const got = formatOf(f) === 'jcamp' ? readBatchJcamp(f.content, { file: f.name, batch: fileStem(f.name), now }) : readBatchCsv(f.content, { ...req.csv, file: f.name, batch: fileStem(f.name), warnings, now });
    batches.push(...got);
  }
  // One property, one unit across the import: values in two units must not meet in one calibration.
  const unitOf = new Map<string, { unit: string; file: string; batch: string }>();
  for (const b of batches) {
    for (const name of Object.keys(b.properties)) {
      const unit = b.propertyUnits?.[name] ?? '';
      const prev = unitOf.get(name);
      if (prev && prev.unit !== unit) {
        throw new ImportError(
          b.source.file,
          b.source.firstLine,
          `batch ${b.id} gives ${name} in "${unit}", but ${prev.file} (batch ${prev.batch}) gives it in "${prev.unit}"; one property has one unit — convert one of them, or name them apart`,
        );
      }
      if (!prev) unitOf.set(name, { unit, file: b.source.file, batch: b.id });
    }
  }
  const seen = new Map<string, string>();
  for (const b of batches) {
    const prev = seen.get(b.id);
    if (prev) throw new ImportError(b.source.file, 0, `batch ${b.id} appears twice in this import (also in ${prev}); a batch must come whole from one place`);
    seen.set(b.id, b.source.file);
  }
  const resampled = new Set<string>();
  if (req.targetAxis) {
    const target = Array.from(req.targetAxis);
    for (const b of batches) {
      if (sameAxis(b.axis, target)) continue;
      const lo = target[0]!;
      const hi = target[target.length - 1]!;
      if (b.axis[0]! > lo || b.axis[b.axis.length - 1]! < hi) {
        throw new ImportError(
          b.source.file,
          0,
          `batch ${b.id}: the file's axis ${b.axis[0]}–${b.axis[b.axis.length - 1]} nm does not cover the model's ${lo}–${hi} nm; Tideline does not extrapolate`,
        );
      }
      const chain = fitChain([{ step: 'resample', axis: target }], b.axis, matrixFromRows(b.spectra.slice(0, 1)));
      const out = new Float64Array(target.length);
      b.spectra = b.spectra.map((s) => Float32Array.from(chain.apply(s, out)));
      b.axis = Float64Array.from(target);
      resampled.add(b.id);
    }
  } else {
    const first = batches[0]!;
    for (const b of batches) {
      if (!sameAxis(b.axis, first.axis)) {
        throw new ImportError(
          b.source.file,
          0,
          `batch ${b.id} has a different wavelength axis (${b.axis.length} points, ${b.axis[0]}–${b.axis[b.axis.length - 1]} nm) from batch ${first.id} (${first.axis.length} points); import them separately or give a model axis to resample onto`,
        );
      }
    }
  }
  return { batches, resampled, warnings };
}

const TSX_API = pathToFileURL(join(dirname(createRequire(import.meta.url).resolve('tsx/package.json')), 'dist/esm/api/index.mjs')).href;
const WORKER_ENTRY = new URL('./import-worker.ts', import.meta.url).href;
const WORKER_BOOTSTRAP = `
const { workerData } = require('node:worker_threads');
import(workerData.tsxApi)
  .then((api) => api.tsImport(workerData.entry, workerData.entry))
  .then((m) => m.serveImportWorker());
`;

/**
 * parseImportFiles in a worker thread of its own (import-worker.ts): the server's main thread stays
 * free for analyzers' acks and the monitor while a large import is parsed (a 46 MB CSV takes seconds),
 * and the parser's garbage goes with the worker. The same checks and errors as parseImportFiles.
 */
export function parseImportFilesInWorker(req: Pick<ImportRequest, 'files' | 'csv' | 'targetAxis'>, now: number): Promise<ReturnType<typeof parseImportFiles>> {
  type Reply = import('./import-worker.ts').ImportParseReply;
  return new Promise((resolve, reject) => {
    const w = new Worker(WORKER_BOOTSTRAP, { eval: true, workerData: { tsxApi: TSX_API, entry: WORKER_ENTRY } });
    let done = false;
    const finish = (f: () => void) => {
      if (done) return;
      done = true;
      void w.terminate();
      f();
    };
    w.once('message', (m: Reply) =>
      finish(() => {
        if (m.ok) resolve({ batches: m.batches, resampled: new Set(m.resampled), warnings: m.warnings });
        else if ('importError' in m) reject(new ImportError(m.importError.file, m.importError.line, m.importError.reason));
        else reject(new Error(`the import parser failed: ${m.error}`));
      }),
    );
    w.once('error', (e) => finish(() => reject(new Error(`the import parser thread failed: ${e.message}`))));
    w.once('exit', (code) => finish(() => reject(new Error(`the import parser thread exited (${code}) before it answered`))));
    w.postMessage({ files: req.files, csv: req.csv, targetAxis: req.targetAxis ? Float64Array.from(req.targetAxis) : undefined, now });
  });
}

/** `s` with every character outside printable ASCII as \uXXXX, at most 80 of them. */
function printable(s: string): string {
  const t = s.length > 80 ? s.slice(0, 80) + '…' : s;
  return t.replace(/[^\x20-\x7e…]/g, (c) => '\\u' + c.charCodeAt(0).toString(16).padStart(4, '0'));
}

/** A file without a batch column or label names its batch by the file name: "D-0042.csv" → "D-0042". */
function fileStem(name: string): string {
  return name.replace(/^.*[\\/]/, '').replace(/\.[^.]*$/, '');
}

function sameAxis(a: ArrayLike<number>, b: ArrayLike<number>): boolean {
  if (a.length !== b.length) return false;
  for (let i = 0; i < a.length; i++) if (Math.abs(a[i]! - b[i]!) > 1e-9 * Math.max(1, Math.abs(a[i]!))) return false;
  return true;
}

/**
 * Parse, check against the store, and write everything in one transaction. `opts.parseInWorker`:
 * parse in a worker thread (the server does; the command line parses inline).
 */
export async function importBatches(storage: Storage, req: ImportRequest, now: number, opts: { parseInWorker?: boolean } = {}): Promise<ImportSummary> {
  const unit = await storage.getUnit(req.unit);
  if (!unit) throw new ImportError('import', 0, `unit "${req.unit}" is not known; create it first (npm run tideline -- unit add ${req.unit})`);
  const pp = textProblem(req.product, { max: 128 });
  if (pp) throw new ImportError('import', 0, `the product name ${pp}`);
  const { batches, resampled, warnings } = opts.parseInWorker ? await parseImportFilesInWorker(req, now) : parseImportFiles(req, now);
  for (const b of batches) {
    const bp = b.product === undefined ? null : textProblem(b.product, { max: 128 });
    if (bp) throw new ImportError(b.source.file, b.source.firstLine, `batch ${b.id}: the product name ${bp}`);
    const ip = idProblem(b.id);
    // the id is shown escaped: a bidirectional or escape character in it would otherwise act on
    // the terminal or page that shows the message
    if (ip) throw new ImportError(b.source.file, b.source.firstLine, `the batch id "${printable(b.id)}" ${ip}`);
    if (await storage.getBatch(b.id)) throw new ImportError(b.source.file, b.source.firstLine, `batch ${b.id} is already in the record; it was not imported again`);
  }
  if (!(await storage.getAnalyzer(IMPORT_ANALYZER))) {
    try {
      await storage.createAnalyzer({ id: IMPORT_ANALYZER, name: 'historical batches imported from files', createdAt: now });
    } catch (e) {
      // Another import created it meanwhile.
      if (!(await storage.getAnalyzer(IMPORT_ANALYZER))) throw e;
    }
  }
  const summary: ImportSummary = {
    importId: now,
    unit: req.unit,
    product: req.product,
    batches: [],
    axis: { points: batches[0]!.axis.length, from: batches[0]!.axis[0]!, to: batches[0]!.axis[batches[0]!.axis.length - 1]! },
    properties: [],
    warnings,
  };
  const labValues = importedLabValues(batches, req.user, now);
  const props = new Map<string, ImportSummary['properties'][number]>();
  for (const v of labValues) {
    let p = props.get(v.property);
    if (!p) props.set(v.property, (p = { name: v.property, unit: v.unit, values: 0, batches: [] }));
    p.values++;
    if (p.batches[p.batches.length - 1] !== v.batch) p.batches.push(v.batch);
  }
  summary.properties = [...props.values()];
  for (const b of batches) {
    const n = b.spectra.length;
    const lab = labValues.filter((v) => v.batch === b.id).length;
    summary.batches.push({ id: b.id, spectra: n, file: b.source.file, from: b.times[0]!, to: b.times[n - 1]!, resampled: resampled.has(b.id), labValues: lab });
    for (const [name, values] of Object.entries(b.properties)) {
      if (!values.some((v) => !Number.isNaN(v))) warnings.push(`${b.source.file}: batch ${b.id} has no ${name} value (the column is empty on all its rows)`);
    }
  }
  // The import's entries are numbered (file-import, boot, seq) like an analyzer's. Two imports that
  // start in the same millisecond (two command-line imports at once, two uploads) would share the
  // boot and clash on seq: the transaction then stores nothing, and the import is tried again with
  // the next boot number.
  for (let attempt = 0; ; attempt++) {
    try {
      await storage.commitIngest(importWrite(batches, req, now + attempt, now, labValues));
      summary.importId = now + attempt;
      return summary;
    } catch (e) {
      if (attempt < 50 && /UNIQUE constraint failed: spectra\.analyzer, spectra\.boot, spectra\.seq/.test((e as Error).message)) continue;
      throw e;
    }
  }
}

/**
 * The files' property values as lab values (source 'import'), each on its own spectrum (the sample
 * time is the spectrum's time: the file pairs them row by row).
 */
function importedLabValues(batches: ImportedBatch[], user: string, now: number): LabValueRow[] {
  const out: LabValueRow[] = [];
  for (const b of batches) {
    for (const [name, values] of Object.entries(b.properties)) {
      const unit = b.propertyUnits?.[name] ?? '';
      values.forEach((value, idx) => {
        if (Number.isNaN(value)) return;
        out.push({
          id: randomUUID(), batch: b.id, property: name, value, unit, sampleT: b.times[idx]!, spectrumIdx: idx, spectrumDtMs: 0,
          method: null, enteredBy: user, enteredAt: now, source: 'import', supersedes: null, reason: null,
        });
      });
    }
  }
  return out;
}

function importWrite(batches: ImportedBatch[], req: ImportRequest, boot: number, now: number, labValues: LabValueRow[]) {
  const w = emptyIngestWrite();
  w.labValues = labValues;
  let seq = 0;
  for (const b of batches) {
    const startSeq = seq++;
    const n = b.spectra.length;
    w.batchStarts.push({ id: b.id, unit: req.unit, analyzer: IMPORT_ANALYZER, boot, product: b.product ?? req.product, startSeq, startT: b.times[0]!, axis: b.axis, modelVersion: null, createdAt: now });
    b.spectra.forEach((values, idx) => {
      w.spectra.push({ batch: b.id, idx, seq: seq++, t: b.times[idx]!, values, analyzer: IMPORT_ANALYZER, boot, receivedAt: now });
    });
    const endSeq = seq++;
    w.batchProgress.push({ batch: b.id, spectrumCount: n, lastSeq: endSeq - 1, lastT: b.times[n - 1]!, endpointState: null, endpointAt: null });
    w.batchEnds.push({ batch: b.id, endSeq, endT: b.times[n - 1]!, endReason: `imported from ${b.source.file} by ${req.user}` });
  }
  return w;
}
