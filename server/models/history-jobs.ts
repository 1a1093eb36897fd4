/**
 * Plant-history decompositions as server jobs (POST /api/models/history-pca, GET …/:job): the
 * request is checked at once (batches stored, ended, on one axis; the chain fitted), then the
 * streamed build (history-pca.ts) runs in worker threads while GET shows its progress — pass,
 * batches read of all, spectra — and, when done, the eigenvalues, explained variance, PRESS per
 * component count with the count of least PRESS, and where the time went. One job at a time per
 * server (a second is refused, 409, naming the running one); finished jobs are kept for the life of
 * the server (the last 20).
 */
import { randomUUID } from 'node:crypto';
import type { HistoryJobView } from '../../core/api/rest.ts';
import type { ServerContext } from '../context.ts';
import { matrixFromRows } from '../../core/linalg/dense-matrix.ts';
import { fitChain } from '../../core/preprocess/index.ts';
import type { ChainSpec } from '../../core/preprocess/spec.ts';
import { historyPca } from './history-pca.ts';
import { requestProblem } from '../api/problem.ts';

/** Spectra the chain's learned state (MSC reference, scaling) is fitted on, spread evenly over the batches. */
export const CHAIN_SAMPLE = 2000;

const jobs = new WeakMap<ServerContext, Map<string, HistoryJobView>>();

function jobsOf(ctx: ServerContext): Map<string, HistoryJobView> {
  let m = jobs.get(ctx);
  if (!m) jobs.set(ctx, (m = new Map()));
  return m;
}

export function historyJob(ctx: ServerContext, id: string): HistoryJobView | null {
  return jobsOf(ctx).get(id) ?? null;
}

export async function startHistoryJob(ctx: ServerContext, req: { referenceBatches: string[]; components: number; groups?: number; chain?: unknown[] }, user: string): Promise<HistoryJobView> {
  const all = jobsOf(ctx);
  const running = [...all.values()].find((j) => j.status === 'running');
  if (running) throw requestProblem(409, `a plant-history decomposition is already running (job ${running.job}, started by ${running.startedBy}); try again when it has finished`, 'Plant-history job running', 'history-busy');
  const ids = req.referenceBatches;
  if (new Set(ids).size !== ids.length) throw requestProblem(400, 'a reference batch is listed twice');
  let axis: Float64Array | null = null;
  for (const id of ids) {
    const b = await ctx.storage.getBatch(id);
    if (!b) throw requestProblem(404, `reference batch "${id}" does not exist`);
    if (b.status !== 'ended') throw requestProblem(409, `reference batch "${id}" is still open; only ended batches can be references`);
    if (b.spectrumCount < 1) throw requestProblem(422, `reference batch "${id}" has no spectra`);
    if (!axis) axis = Float64Array.from(b.axis);
    else if (b.axis.length !== axis.length || b.axis.some((v, j) => Math.abs(v - axis![j]!) > 1e-6)) throw requestProblem(422, `reference batch "${id}" is on another wavelength axis than "${ids[0]}" (${b.axis.length} points); resample on import (resampleToModel) or choose batches of one analyzer`);
  }
  const groups = req.groups ?? Math.min(7, ids.length);
  if (groups !== 0 && (groups < 2 || groups > ids.length)) throw requestProblem(422, `groups = ${groups} must be 0 (no cross-validation) or from 2 to the ${ids.length} batches`);
  // The chain's learned state from an evenly spread sample (at most CHAIN_SAMPLE spectra).
  let chainJson: unknown = null;
  let chainText = 'raw spectra (no preprocessing)';
  if (req.chain && req.chain.length) {
    const per = Math.max(1, Math.ceil(CHAIN_SAMPLE / ids.length));
    const rows: Float32Array[] = [];
    for (const id of ids) {
      const b = (await ctx.storage.getBatch(id))!;
      const step = Math.max(1, Math.floor(b.spectrumCount / per));
      let k = 0;
      for await (const s of ctx.storage.iterateSpectra(id)) if (k++ % step === 0 && rows.length < CHAIN_SAMPLE + ids.length) rows.push(s.values);
    }
    try {
      const chain = fitChain(req.chain as ChainSpec, axis!, matrixFromRows(rows));
      chainJson = chain.toJSON();
      chainText = `${(req.chain as { step: string }[]).map((s) => s.step).join(' → ')}, learned state fitted on ${rows.length} spectra spread over the batches`;
    } catch (e) {
      throw requestProblem(422, `the preprocessing chain could not be fitted: ${(e as Error).message}`);
    }
  }
  const job: HistoryJobView = {
    job: randomUUID(), status: 'running', startedAt: ctx.now(), startedBy: user, batches: ids.length, components: req.components, groups,
    progress: { pass: 'scatter', batches: 0, of: ids.length, spectra: 0 }, result: null, error: null,
  };
  all.set(job.job, job);
  while (all.size > 20) {
    const oldest = [...all.values()].find((j) => j.status !== 'running');
    if (!oldest) break;
    all.delete(oldest.job);
  }
  const source = ctx.storage.spectrumSource();
  const t = performance.now();
  // The server's close stops the workers (a job is not resumed after a restart).
  const abort = new AbortController();
  ctx.onClose(() => abort.abort());
  void historyPca({ source, batches: ids, components: req.components, groups, chain: chainJson, onProgress: (p) => (job.progress = p), signal: abort.signal }).then(
    (h) => {
      const lam = Array.from(h.model.eigenvalues);
      const explained = lam.map((v) => v / h.model.totalVariance);
      let cum = 0;
      job.result = {
        spectra: h.spectra, variables: h.variables, workers: h.workers, eigenvalues: lam, explained, cumulative: explained.map((e) => (cum += e)),
        press: h.press, leastPress: h.press ? h.press.indexOf(Math.min(...h.press)) + 1 : null,
        seconds: { ...h.seconds, total: (performance.now() - t) / 1000 }, chain: chainText,
      };
      job.status = 'done';
    },
    (e: Error) => {
      job.error = e.message;
      job.status = 'failed';
    },
  );
  return job;
}
