/**
 * Runs inside a worker thread (import-batches.ts parseImportFilesInWorker starts one per import):
 * parses the files of one import (CSV / JCAMP-DX, every check of parseImportFiles) off the server's
 * main thread, so that a large import does not hold back acks to analyzers and the monitor, and so
 * that the parser's garbage goes with the worker instead of staying in the server's heap. The
 * spectra come back with their buffers transferred (no copy).
 */
import { parentPort } from 'node:worker_threads';
import { ImportError } from '../../core/io/imported-batch.ts';
import { parseImportFiles, type ImportRequest } from './import-batches.ts';

export interface ImportParseJob {
  files: ImportRequest['files'];
  csv?: ImportRequest['csv'];
  targetAxis?: Float64Array;
  now: number;
}

export type ImportParseReply =
  | { ok: true; batches: ReturnType<typeof parseImportFiles>['batches']; resampled: string[]; warnings: string[] }
  | { ok: false; importError: { file: string; line: number; reason: string } }
  | { ok: false; error: string };

export function serveImportWorker(): void {
  parentPort!.once('message', (job: ImportParseJob) => {
    let reply: ImportParseReply;
    const transfer: ArrayBuffer[] = [];
    try {
      const r = parseImportFiles({ files: job.files, csv: job.csv, targetAxis: job.targetAxis }, job.now);
      for (const b of r.batches) {
        transfer.push(b.axis.buffer as ArrayBuffer);
        for (const s of b.spectra) if (s.byteOffset === 0 && s.byteLength === s.buffer.byteLength) transfer.push(s.buffer as ArrayBuffer);
      }
      reply = { ok: true, batches: r.batches, resampled: [...r.resampled], warnings: r.warnings };
    } catch (e) {
      reply = e instanceof ImportError ? { ok: false, importError: { file: e.file, line: e.line, reason: e.reason } } : { ok: false, error: (e as Error).stack ?? String(e) };
    }
    parentPort!.postMessage(reply, [...new Set(transfer)]);
  });
}
