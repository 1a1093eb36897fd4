/**
 * The golden band of whole spectra for the spectrum view: at the progress of the spectrum shown, the
 * reference batches' own spectra near that progress (raw, and through the model's preprocessing),
 * one mean spectrum per batch, then mean ± k·s between batches per wavelength (core/envelope/
 * spectral-band.ts; k is the score envelope's multiplier, so both bands are read alike).
 *
 * The reference batches are replayed once per version through a batch monitor of that version, so
 * their progress is exactly what the live monitor computes; a version is immutable, so the replay
 * (progress and seq per spectrum) and each band asked for are kept for the life of the server.
 * Reference batches no longer stored, or on another axis, are left out.
 */
import { gridIndex } from '../../core/envelope/envelope.ts';
import { meanSpectrum, spectralBand } from '../../core/envelope/spectral-band.ts';
import type { MonitoringModel } from '../../core/model/monitoring-model.ts';
import { createBatchMonitor } from '../../core/monitor/batch-monitor.ts';
import type { ServerContext } from '../context.ts';
import type { ModelVersionRow } from '../storage/storage.ts';

export interface GoldenSpectra {
  raw: { mean: number[]; lower: number[]; upper: number[] };
  preprocessed: { mean: number[]; lower: number[]; upper: number[] };
  /** Reference batches and spectra pooled, and the progress window they came from. */
  batches: number;
  spectra: number;
  progressFrom: number;
  progressTo: number;
  k: number;
  method: string;
}

interface Replayed {
  /** Per reference batch: its id, and the seq and envelope grid index of each spectrum. */
  refs: { batch: string; seqs: number[]; grid: Int32Array }[];
  bands: Map<number, GoldenSpectra | string>;
}

const cache = new WeakMap<ServerContext, Map<string, Promise<Replayed>>>();

async function replay(ctx: ServerContext, row: ModelVersionRow, model: MonitoringModel): Promise<Replayed> {
  const refs: Replayed['refs'] = [];
  for (const id of row.referenceBatches) {
    const b = await ctx.storage.getBatch(id);
    if (!b || b.axis.length !== model.chain.inputAxis.length) continue;
    const mon = createBatchMonitor(model, b.startT);
    const seqs: number[] = [];
    const grid: number[] = [];
    for await (const sp of ctx.storage.iterateSpectra(id)) {
      const r = mon.push(sp.seq, sp.t, sp.values);
      seqs.push(sp.seq);
      grid.push(gridIndex(model.envelope, r.progress));
    }
    if (seqs.length) refs.push({ batch: id, seqs, grid: Int32Array.from(grid) });
  }
  return { refs, bands: new Map() };
}

/**
 * The golden band at `progress` (the spectrum's own, from its stored result), or a sentence saying
 * why there is none. Pools each reference batch's spectra within ±max(1, smoothing) envelope grid
 * points of that progress — the window the per-point T²/Q limits pool over.
 */
export async function goldenSpectraAt(ctx: ServerContext, row: ModelVersionRow, model: MonitoringModel, progress: number): Promise<GoldenSpectra | string> {
  let perCtx = cache.get(ctx);
  if (!perCtx) cache.set(ctx, (perCtx = new Map()));
  let pending = perCtx.get(row.id);
  if (!pending) {
    pending = replay(ctx, row, model);
    perCtx.set(row.id, pending);
    pending.catch(() => perCtx!.delete(row.id));
  }
  const rep = await pending;
  const env = model.envelope;
  const k = gridIndex(env, progress);
  const hit = rep.bands.get(k);
  if (hit) return hit;
  const half = Math.max(1, env.smoothing);
  const lo = Math.max(0, k - half);
  const hi = Math.min(env.grid.length - 1, k + half);
  const rawMeans: Float64Array[] = [];
  const preMeans: Float64Array[] = [];
  let spectra = 0;
  for (const r of rep.refs) {
    const raw: Float32Array[] = [];
    for (let i = 0; i < r.seqs.length; i++) {
      if (r.grid[i] < lo || r.grid[i] > hi) continue;
      const sp = await ctx.storage.getSpectrumBySeq(r.batch, r.seqs[i]);
      if (sp) raw.push(sp.values);
    }
    if (raw.length === 0) continue;
    spectra += raw.length;
    rawMeans.push(meanSpectrum(raw));
    preMeans.push(meanSpectrum(raw.map((s) => model.chain.apply(s))));
  }
  let out: GoldenSpectra | string;
  if (rawMeans.length < 2) {
    out = `fewer than 2 stored reference batches reached this progress (${rawMeans.length} of ${row.referenceBatches.length})`;
  } else {
    const kk = env.k;
    const rb = spectralBand(rawMeans, kk);
    const pb = spectralBand(preMeans, kk);
    const arr = (b: typeof rb) => ({ mean: Array.from(b.mean), lower: Array.from(b.lower), upper: Array.from(b.upper) });
    out = {
      raw: arr(rb),
      preprocessed: arr(pb),
      batches: rawMeans.length,
      spectra,
      progressFrom: env.grid[lo]!,
      progressTo: env.grid[hi]!,
      k: kk,
      method: `mean of ${rawMeans.length} reference batches' mean spectra near this progress ± ${+kk.toPrecision(3)} sd between batches (the score envelope's multiplier)`,
    };
  }
  rep.bands.set(k, out);
  return out;
}
