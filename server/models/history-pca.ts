/**
 * The PCA of a plant history — hundreds of reference batches, too many spectra for an n × p matrix —
 * streamed from the database by worker threads (server/models/history-worker.ts), one per core:
 *
 * 1. pass one: each worker streams its share of the batches (every W-th) through the chain into
 *    per-group scatter accumulators about one provisional centre (the first stored spectrum); the
 *    states are merged here and the model's eigenpairs and θ1..θ3 come from the p × p covariance
 *    (core/pca/streaming-pca.ts);
 * 2. pass two (cross-validation, optional): the leave-one-group-out models (group = batch index mod
 *    `groups`, so a batch is never split) by subtraction, and each group's PRESS for 1…maxA
 *    components from a second streamed pass.
 *
 * Memory: per worker, groups × p² doubles plus one spectrum; nothing grows with the number of
 * spectra. Progress (batches and spectra read per pass) goes to `onProgress`.
 */
import { availableParallelism } from 'node:os';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { Worker } from 'node:worker_threads';
import { loadChain } from '../../core/preprocess/index.ts';
import { foldModels, mergeScatter, pcaFromScatter, type ScatterState } from '../../core/pca/streaming-pca.ts';
import type { PcaCore } from '../../core/pca/fit-pca.ts';
import type { SpectrumSourceRef } from '../storage/repositories.ts';
import { openSpectrumReader } from '../storage/spectrum-reader.ts';
import type { HistoryJob, HistoryReply, HistoryRequest } from './history-worker.ts';

const TSX_API = pathToFileURL(join(dirname(createRequire(import.meta.url).resolve('tsx/package.json')), 'dist/esm/api/index.mjs')).href;
const ENTRY = new URL('./history-worker.ts', import.meta.url).href;
const BOOTSTRAP = `
const { workerData } = require('node:worker_threads');
import(workerData.tsxApi)
  .then((api) => api.tsImport(workerData.entry, workerData.entry))
  .then((m) => m.serveHistoryWorker());
`;

export interface HistoryProgress {
  pass: 'scatter' | 'cross-validation';
  batches: number;
  of: number;
  spectra: number;
}

export interface HistoryPcaOptions {
  /** Where the spectra are stored (Storage.spectrumSource()); each worker opens its own reader on it. */
  source: SpectrumSourceRef;
  batches: string[];
  components: number;
  /** Fitted chain (JSON) applied to each raw spectrum; null: the raw spectra. */
  chain?: unknown | null;
  /** Cross-validation groups (default 7); 0: no cross-validation. */
  groups?: number;
  /** Largest component count cross-validated (default components + 2, at most p − 1). */
  maxComponents?: number;
  /** Worker threads (default: the cores available). */
  workers?: number;
  seed?: number;
  onProgress?: (p: HistoryProgress) => void;
  /** Aborting stops the workers; the promise then rejects. */
  signal?: AbortSignal;
}

export interface HistoryPca {
  model: PcaCore;
  spectra: number;
  variables: number;
  workers: number;
  /** PRESS per component count 1…maxA (null without cross-validation). */
  press: number[] | null;
  /** Seconds: first pass (stream + accumulate), decomposition, cross-validation (folds + second pass). */
  seconds: { scatter: number; decomposition: number; crossValidation: number };
}

function startWorker(): Worker {
  return new Worker(BOOTSTRAP, { eval: true, workerData: { tsxApi: TSX_API, entry: ENTRY } });
}

function ask(w: Worker, req: HistoryRequest, onProgress: (batches: number, spectra: number) => void): Promise<HistoryReply> {
  return new Promise((resolve, reject) => {
    const onMsg = (m: HistoryReply) => {
      if (m.kind === 'progress') return onProgress(m.batches, m.spectra);
      w.off('message', onMsg);
      w.off('error', onErr);
      w.off('exit', onExit);
      if (m.kind === 'error') reject(new RangeError(m.message));
      else resolve(m);
    };
    const onErr = (e: Error) => {
      w.off('message', onMsg);
      w.off('exit', onExit);
      reject(new Error(`plant-history worker failed: ${e.message}`));
    };
    const onExit = (code: number) => {
      w.off('message', onMsg);
      w.off('error', onErr);
      reject(new Error(`plant-history worker stopped (exit code ${code}) before it answered`));
    };
    w.on('message', onMsg);
    w.once('error', onErr);
    w.once('exit', onExit);
    w.postMessage(req);
  });
}

export async function historyPca(o: HistoryPcaOptions): Promise<HistoryPca> {
  if (o.batches.length < 2) throw new RangeError(`a plant-history PCA needs at least 2 batches (got ${o.batches.length})`);
  const G = o.groups ?? 7;
  if (G !== 0 && (G < 2 || G > o.batches.length)) throw new RangeError(`cross-validation groups = ${G} must be 0 or from 2 to the ${o.batches.length} batches`);
  // The provisional centre and the raw length: the first stored spectrum of the first batch.
  const reader = openSpectrumReader(o.source);
  let first: Float32Array;
  try {
    const r = await reader.first(o.batches[0]!);
    if (!r) throw new RangeError(`batch "${o.batches[0]}" has no stored spectra`);
    first = r;
  } finally {
    await reader.close();
  }
  const chain = o.chain ? loadChain(o.chain) : null;
  const centre = chain ? Float64Array.from(chain.apply(first)) : Float64Array.from(first);
  const p = centre.length;
  const W = Math.max(1, Math.min(o.workers ?? availableParallelism(), o.batches.length));
  const groups = Math.max(G, 1);
  const shares: HistoryJob[] = Array.from({ length: W }, () => ({ source: o.source, batches: [], groups, chain: o.chain ?? null, pIn: first.length, centre }));
  o.batches.forEach((id, i) => shares[i % W]!.batches.push({ id, group: G ? i % G : 0 }));
  if (o.signal?.aborted) throw new Error('the plant-history decomposition was stopped before it started');
  const workers = shares.map(() => startWorker());
  const stop = () => {
    for (const w of workers) void w.terminate();
  };
  o.signal?.addEventListener('abort', stop, { once: true });
  const done = new Array<{ batches: number; spectra: number }>(W).fill({ batches: 0, spectra: 0 });
  const report = (pass: HistoryProgress['pass']) => (k: number) => (batches: number, spectra: number) => {
    done[k] = { batches, spectra };
    o.onProgress?.({ pass, batches: done.reduce((s, d) => s + d.batches, 0), of: o.batches.length, spectra: done.reduce((s, d) => s + d.spectra, 0) });
  };
  try {
    let t = performance.now();
    const onScatter = report('scatter');
    const replies = await Promise.all(workers.map((w, k) => ask(w, { kind: 'scatter', ...shares[k]! }, onScatter(k))));
    const groupStates: ScatterState[] = Array.from({ length: groups }, (_, g) => replies.map((r) => (r as Extract<HistoryReply, { kind: 'scatter' }>).states[g]!).reduce(mergeScatter));
    const total = groupStates.reduce(mergeScatter);
    const tScatter = (performance.now() - t) / 1000;
    t = performance.now();
    const model = pcaFromScatter(total, o.components, o.seed ?? 1);
    const tEig = (performance.now() - t) / 1000;
    let press: number[] | null = null;
    let tCv = 0;
    if (G) {
      t = performance.now();
      const maxA = Math.min(o.maxComponents ?? o.components + 2, p - 1, total.n - 2);
      const folds = foldModels(groupStates, total, maxA, o.seed ?? 1);
      done.fill({ batches: 0, spectra: 0 });
      const onPress = report('cross-validation');
      const pr = await Promise.all(workers.map((w, k) => ask(w, { kind: 'press', folds, ...shares[k]! }, onPress(k))));
      press = Array.from({ length: maxA }, (_, a) => pr.reduce((s, r) => s + (r as Extract<HistoryReply, { kind: 'press' }>).press.reduce((u, v) => u + v[a]!, 0), 0));
      tCv = (performance.now() - t) / 1000;
    }
    return { model, spectra: total.n, variables: p, workers: W, press, seconds: { scatter: tScatter, decomposition: tEig, crossValidation: tCv } };
  } finally {
    o.signal?.removeEventListener('abort', stop);
    await Promise.all(workers.map((w) => w.terminate()));
  }
}
