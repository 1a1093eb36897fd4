/**
 * Post-batch comparison of a finished batch with the golden batches.
 *
 * - Dynamic time warping of the batch's score trajectory onto the golden mean trajectory
 *   (Kassidas, MacGregor & Taylor 1998, AIChE J. 44:864), symmetric steps with a Sakoe–Chiba band
 *   (Sakoe & Chiba 1978), each PC weighted by the inverse of its variance;
 * - the warping path and the deviations of the aligned scores from the golden mean (in scores and
 *   in envelope standard deviations);
 * - the first point where the batch left the envelope (the same on-delay rule as the live alarms)
 *   and the first single point outside;
 * - over the departure window, the wavelength regions that contributed most to T² and Q
 *   (Westerhuis, Gurden & Smilde 2000 contributions; regions and band assignments in core/bands);
 *   no window when the batch never left by the alarm rule.
 */
import { dtw, alignToReference } from '../align/dtw.ts';
import { contributions as pcaContributions } from '../contributions/index.ts';
import { sumByRegion } from '../bands/nir-bands.ts';
import type { MonitoringModel } from '../model/monitoring-model.ts';
import { createBatchMonitor } from '../monitor/batch-monitor.ts';
import type { ConditionKind } from '../monitor/types.ts';

export interface CompareOptions {
  /** Sakoe–Chiba band half-width as a fraction of the golden trajectory length (default 0.2). */
  bandFraction?: number;
  /** Spectra after the first exit that make up the departure window (default 10). */
  windowSpectra?: number;
  /** Regions to report (default 5). */
  topRegions?: number;
}

export interface RegionContribution {
  name: string;
  from: number;
  to: number;
  assignment: string;
  /** Summed contribution over the departure window. */
  t2: number;
  q: number;
  /** Share of the window's summed |T² contribution| and Q. */
  t2Share: number;
  qShare: number;
}

export interface BatchComparison {
  modelId: string;
  spectra: number;
  /** Per spectrum: minutes since start, progress, scores, T², Q. */
  trajectory: { elapsedMin: number[]; progress: number[]; scores: number[][]; t2: number[]; q: number[] };
  dtw: {
    /** Normalised symmetric DTW distance (Sakoe & Chiba 1978). */
    distance: number;
    band: number;
    /** Pairs [batch index, golden grid index]. */
    path: [number, number][];
  };
  /** On the golden progress grid. */
  aligned: { grid: number[]; pcs: { pc: number; score: number[]; expected: number[]; deviation: number[]; sd: number[] }[] };
  /** The first alarm-rule exit (after on-delay); null if the batch never left. */
  firstExit: { index: number; t: number; elapsedMin: number; kind: ConditionKind; key: string; message: string } | null;
  /** The first single point outside the envelope or a limit (may be a suspect scan). */
  firstOutside: { index: number; t: number; elapsedMin: number; what: string } | null;
  departureWindow: { from: number; to: number } | null;
  regions: RegionContribution[];
  /** Variables (nm) with the largest summed Q and T² contributions over the window. */
  topVariables: { nm: number; t2: number; q: number }[];
}

export function compareBatch(model: MonitoringModel, batch: { times: ArrayLike<number>; spectra: ArrayLike<number>[] }, opts: CompareOptions = {}): BatchComparison {
  const n = batch.spectra.length;
  if (n === 0) throw new RangeError('compareBatch: the batch has no spectra');
  if (batch.times.length !== n) throw new RangeError(`compareBatch: ${n} spectra but ${batch.times.length} times`);
  const env = model.envelope;
  const A = model.pca.nComponents;
  const t0 = batch.times[0];
  const mon = createBatchMonitor(model, t0);
  const traj: BatchComparison['trajectory'] = { elapsedMin: [], progress: [], scores: [], t2: [], q: [] };
  let firstExit: BatchComparison['firstExit'] = null;
  let firstOutside: BatchComparison['firstOutside'] = null;
  for (let i = 0; i < n; i++) {
    const r = mon.push(i, batch.times[i], batch.spectra[i]);
    traj.elapsedMin.push(r.elapsedMin);
    traj.progress.push(r.progress);
    traj.scores.push(r.scores);
    traj.t2.push(r.t2);
    traj.q.push(r.q);
    if (!firstOutside) {
      const out = r.envelope.find((e) => e.status === 'above' || e.status === 'below');
      const lt = r.localLimits ?? r.limits;
      const what = r.t2 > lt.t2 ? `T² ${r.t2.toPrecision(3)} > ${lt.t2.toPrecision(3)}` : r.q > lt.q ? `Q ${r.q.toPrecision(3)} > ${lt.q.toPrecision(3)}` : out ? `PC${out.pc} ${out.status} the envelope (${out.sd!.toFixed(1)} sd)` : null;
      if (what) firstOutside = { index: i, t: batch.times[i], elapsedMin: r.elapsedMin, what };
    }
    if (!firstExit) {
      const c = r.conditionChanges.find((x) => x.active);
      if (c) firstExit = { index: i, t: batch.times[i], elapsedMin: r.elapsedMin, kind: c.kind, key: c.key, message: c.message };
    }
  }

  // DTW of the score trajectory onto the golden mean, PCs weighted by 1/λ_a.
  const P = env.grid.length;
  const golden = Array.from({ length: P }, (_, k) => env.pcs.map((pc) => pc.mean[k]));
  const weights = Array.from(model.pca.eigenvalues, (l) => 1 / l);
  const band = Math.max(2, Math.ceil((opts.bandFraction ?? 0.2) * P));
  const d = dtw(traj.scores, golden, { band, weights });
  const al = alignToReference(traj.scores, d.path, P);
  const aligned: BatchComparison['aligned'] = {
    grid: env.grid.slice(),
    pcs: Array.from({ length: A }, (_, a) => {
      const pc = env.pcs[a];
      const score = al.map((row) => row[a]);
      return {
        pc: a + 1,
        score,
        expected: pc.mean.slice(),
        deviation: score.map((s, k) => s - pc.mean[k]),
        sd: score.map((s, k) => (pc.sd[k] > 0 ? (s - pc.mean[k]) / pc.sd[k] : 0)),
      };
    }),
  };

  // Departure window: from the first exit by the alarm rule on. A batch that never left by that rule
  // has none: single points outside (about 1 in 100 at a 99 % limit) happen in good batches too.
  const start = firstExit?.index ?? null;
  let regions: RegionContribution[] = [];
  let topVariables: BatchComparison['topVariables'] = [];
  let departureWindow: BatchComparison['departureWindow'] = null;
  if (start !== null) {
    const to = Math.min(n - 1, start + (opts.windowSpectra ?? 10) - 1);
    departureWindow = { from: start, to };
    const p = model.chain.outputAxis.length;
    const sumT2 = new Float64Array(p);
    const sumQ = new Float64Array(p);
    const xp = new Float64Array(p);
    for (let i = start; i <= to; i++) {
      model.chain.apply(batch.spectra[i], xp);
      const c = pcaContributions(model.pca, xp);
      for (let j = 0; j < p; j++) { sumT2[j] += c.t2[j]; sumQ[j] += c.q[j]; }
    }
    const axis = Array.from(model.chain.outputAxis);
    const absT2 = Array.from(sumT2, Math.abs);
    const totT2 = absT2.reduce((s, v) => s + v, 0) || 1;
    const totQ = sumQ.reduce((s, v) => s + v, 0) || 1;
    const byRegion = sumByRegion(axis, [sumT2, sumQ, absT2]);
    regions = byRegion
      .map((r) => ({ name: r.region.name, from: r.region.from, to: r.region.to, assignment: r.region.assignment, t2: r.sums[0], q: r.sums[1], t2Share: r.sums[2] / totT2, qShare: r.sums[1] / totQ }))
      .sort((x, y) => Math.max(y.qShare, y.t2Share) - Math.max(x.qShare, x.t2Share))
      .slice(0, opts.topRegions ?? 5);
    topVariables = axis
      .map((nm, j) => ({ nm, t2: sumT2[j], q: sumQ[j] }))
      .sort((x, y) => y.q / totQ + Math.abs(y.t2) / totT2 - (x.q / totQ + Math.abs(x.t2) / totT2))
      .slice(0, 10);
  }
  return { modelId: model.id, spectra: n, trajectory: traj, dtw: { distance: d.distance, band, path: d.path }, aligned, firstExit, firstOutside, departureWindow, regions, topVariables };
}
