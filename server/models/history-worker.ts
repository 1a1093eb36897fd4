/**
 * Runs inside a worker thread (server/models/history-pca.ts starts it): streams its share of the
 * reference batches' spectra from the storage (its own reader, server/storage/spectrum-reader.ts:
 * a database connection cannot cross threads; one spectrum at a time) through the model's chain into per-group scatter accumulators (core/pca/streaming-pca.ts),
 * so memory is groups × p² whatever the number of spectra. Two requests:
 *
 * - 'scatter': the group states, with progress after every batch;
 * - 'press': given the leave-one-group-out models, the squared residuals of its batches' spectra
 *   under the model without their group (cross-validation), again with progress.
 */
import { parentPort } from 'node:worker_threads';
import { loadChain, type FittedChain } from '../../core/preprocess/index.ts';
import { residualPress, ScatterAccumulator, type ScatterState } from '../../core/pca/streaming-pca.ts';
import type { PcaCore } from '../../core/pca/fit-pca.ts';
import type { SpectrumSourceRef } from '../storage/repositories.ts';
import { openSpectrumReader } from '../storage/spectrum-reader.ts';

export interface HistoryJob {
  source: SpectrumSourceRef;
  /** This worker's batches, with the group each belongs to. */
  batches: { id: string; group: number }[];
  groups: number;
  /** Fitted chain JSON (null: raw spectra). */
  chain: unknown | null;
  /** Length of a raw spectrum. */
  pIn: number;
  centre: Float64Array;
}

export type HistoryRequest = ({ kind: 'scatter' } & HistoryJob) | ({ kind: 'press'; folds: PcaCore[] } & HistoryJob);

export type HistoryReply =
  | { kind: 'progress'; batches: number; spectra: number }
  | { kind: 'scatter'; states: ScatterState[] }
  | { kind: 'press'; press: Float64Array[]; spectra: number }
  | { kind: 'error'; message: string };

export async function runHistoryJob(req: HistoryRequest, progress: (batches: number, spectra: number) => void): Promise<HistoryReply> {
  const reader = openSpectrumReader(req.source);
  const raw = new Float32Array(req.pIn);
  try {
    const chain: FittedChain | null = req.chain ? loadChain(req.chain) : null;
    const p = chain ? chain.outputAxis.length : req.pIn;
    const x = new Float64Array(p);
    let spectra = 0;
    let done = 0;
    if (req.kind === 'scatter') {
      const acc = Array.from({ length: req.groups }, () => new ScatterAccumulator(p, req.centre));
      for (const b of req.batches) {
        const a = acc[b.group]!;
        for await (const _ of reader.spectra(b.id, raw)) {
          if (chain) chain.apply(raw, x);
          a.add(chain ? x : raw);
          spectra++;
        }
        progress(++done, spectra);
      }
      return { kind: 'scatter', states: acc.map((s) => s.state()) };
    }
    const maxA = req.folds[0]!.eigenvalues.length;
    const press = req.folds.map(() => new Float64Array(maxA));
    const work = new Float64Array(p);
    for (const b of req.batches) {
      const m = req.folds[b.group]!;
      for await (const _ of reader.spectra(b.id, raw)) {
        if (chain) chain.apply(raw, x);
        residualPress(m, chain ? x : raw, press[b.group]!, work);
        spectra++;
      }
      progress(++done, spectra);
    }
    return { kind: 'press', press, spectra };
  } finally {
    await reader.close();
  }
}

/** Called by the worker's bootstrap: answer requests until the parent closes the port. */
export function serveHistoryWorker(): void {
  const port = parentPort;
  if (!port) throw new Error('serveHistoryWorker runs only inside a worker thread');
  port.on('message', (req: HistoryRequest) => {
    runHistoryJob(req, (batches, spectra) => port.postMessage({ kind: 'progress', batches, spectra } satisfies HistoryReply)).then(
      (r) => {
        const transfer = r.kind === 'scatter' ? r.states.flatMap((s) => [s.sum.buffer, s.upper.buffer]) : r.kind === 'press' ? r.press.map((v) => v.buffer) : [];
        port.postMessage(r, transfer as ArrayBuffer[]);
      },
      (e: unknown) => port.postMessage({ kind: 'error', message: String((e as Error)?.message ?? e) } satisfies HistoryReply),
    );
  });
}
