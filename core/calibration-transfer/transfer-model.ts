/**
 * A monitoring model carried over to a new analyzer by calibration transfer: the source version's
 * chain, PCA, limits, envelope, endpoint rule and property model unchanged, with a DS or PDS
 * transform (standardisation.ts) fitted on transfer samples in front of them. The transform, how it
 * was fitted, on which transfer sets, and its judgement on held-out transfer sets are members of
 * the model file's body, so the file's SHA-256 covers them; a file with a transform is format
 * version 2 (a reader that knows only version 1 refuses it rather than ignoring the transform).
 *
 * The judgement, on transfer sets kept out of the fit: each held-out sample judged by the source
 * version three ways — the old analyzer's spectrum (what the model was built for), the new
 * analyzer's spectrum interpolated linearly onto the old axis (no transfer: "before"), and the new
 * analyzer's spectrum through the transform ("after") — as T², Q and the share beyond their limits
 * (exact Clopper–Pearson interval), the spectral RMS difference from the old analyzer's spectrum,
 * and with a property model the prediction's RMS difference from the old analyzer's prediction and,
 * where lab values exist, from the lab value.
 */
import { z } from 'zod';
import type { ApprovalWarning, CalibrationTransferView, TransferJudgement, TransferSideStats } from '../api/rest.ts';
import { matrixFromRows } from '../linalg/dense-matrix.ts';
import { createProjector } from '../pca/projector.ts';
import { clopperPearson, FAR_ABOVE_FACTOR } from '../evaluate/approval-evidence.ts';
import { fitDirectStandardisation, fitPiecewiseDirectStandardisation, applyStandardisation, type Standardisation } from './standardisation.ts';
import { standardisationFromJSON, standardisationToJSON } from './transfer-chain.ts';
import type { MonitoringModel } from '../model/monitoring-model.ts';

export const TRANSFER_CAUTION = "Tideline advises: whether a transferred model may judge the new analyzer's batches is decided by the site's validated procedures for an analyzer change.";

/** One transfer set: the same samples on the old and on the new analyzer, row for row. */
export interface TransferSet {
  /** Batch ids as stored. */
  old: string;
  new: string;
  oldAxis: ArrayLike<number>;
  newAxis: ArrayLike<number>;
  oldSpectra: ArrayLike<number>[];
  newSpectra: ArrayLike<number>[];
  /** Lab value of the model's property per sample (NaN where none). */
  property?: ArrayLike<number>;
}

export interface TransferOptions {
  method: 'ds' | 'pds';
  window?: number;
  rcond?: number;
  maxRank?: number;
  fit: TransferSet[];
  heldOut: TransferSet[];
  source: { versionId: string | null; version: number | null };
  author: string;
  /** ms epoch */
  createdAt: number;
}

/** The record in the model file (everything but the transform is plain JSON). */
export const transferRecordSchema = z.strictObject({
  transform: z.unknown(),
  settings: z.strictObject({ method: z.enum(['ds', 'pds']), window: z.number().int().nullable(), rcond: z.number(), maxRank: z.number().int().nullable() }),
  source: z.strictObject({ modelId: z.string(), sha256: z.string(), name: z.string(), version: z.number().int().nullable(), versionId: z.string().nullable() }),
  fit: z.array(z.strictObject({ old: z.string(), new: z.string(), spectra: z.number().int() })),
  heldOut: z.array(z.strictObject({ old: z.string(), new: z.string(), spectra: z.number().int() })),
  judgement: z.record(z.string(), z.unknown()),
  createdAt: z.number(),
  author: z.string(),
});
export type TransferRecordJson = z.infer<typeof transferRecordSchema>;

export interface ModelTransfer extends Omit<TransferRecordJson, 'transform' | 'judgement'> {
  transform: Standardisation;
  judgement: TransferJudgement;
}

export function transferRecordToJSON(t: ModelTransfer): TransferRecordJson {
  return { ...t, transform: standardisationToJSON(t.transform), judgement: t.judgement as unknown as Record<string, unknown> };
}

export function transferRecordFromJSON(json: unknown): ModelTransfer {
  const r = transferRecordSchema.safeParse(json);
  if (!r.success) {
    const i = r.error.issues[0]!;
    throw new RangeError(`monitoring model: transfer.${i.path.join('.')}: ${i.message}`);
  }
  return { ...r.data, transform: standardisationFromJSON(r.data.transform), judgement: r.data.judgement as unknown as TransferJudgement };
}

function checkSet(s: TransferSet, oldAxis: ArrayLike<number>, newAxis: ArrayLike<number> | null, role: string): void {
  const pair = `transfer set ${s.old} / ${s.new}`;
  if (s.oldSpectra.length !== s.newSpectra.length) throw new RangeError(`${pair} (${role}): ${s.oldSpectra.length} spectra on the old analyzer but ${s.newSpectra.length} on the new one; they must be the same samples, row for row`);
  if (s.oldSpectra.length === 0) throw new RangeError(`${pair} (${role}) has no spectra`);
  if (s.oldAxis.length !== oldAxis.length || Array.from(s.oldAxis).some((v, k) => Math.abs(v - oldAxis[k]!) > 1e-6)) {
    throw new RangeError(`${pair} (${role}): batch ${s.old} is on a ${s.oldAxis.length}-point axis, not the model's ${oldAxis.length}-point axis (${oldAxis[0]}–${oldAxis[oldAxis.length - 1]} nm); the old analyzer's spectra must be on the axis the model was built on`);
  }
  if (newAxis && (s.newAxis.length !== newAxis.length || Array.from(s.newAxis).some((v, k) => Math.abs(v - newAxis[k]!) > 1e-6))) {
    throw new RangeError(`${pair} (${role}): batch ${s.new} is on another axis than the other new-analyzer batches (${s.newAxis.length} points from ${s.newAxis[0]} nm)`);
  }
  if (s.property && s.property.length !== s.oldSpectra.length) throw new RangeError(`${pair}: ${s.property.length} lab values for ${s.oldSpectra.length} samples`);
}

/** Linear interpolation of a spectrum onto another axis; outside its range the nearest end value. */
export function interpolateOnto(fromAxis: ArrayLike<number>, x: ArrayLike<number>, toAxis: ArrayLike<number>, out: Float64Array): Float64Array {
  const n = fromAxis.length;
  let k = 0;
  for (let j = 0; j < toAxis.length; j++) {
    const l = toAxis[j]!;
    if (l <= fromAxis[0]!) {
      out[j] = x[0]!;
      continue;
    }
    if (l >= fromAxis[n - 1]!) {
      out[j] = x[n - 1]!;
      continue;
    }
    while (k < n - 2 && fromAxis[k + 1]! < l) k++;
    const f = (l - fromAxis[k]!) / (fromAxis[k + 1]! - fromAxis[k]!);
    out[j] = x[k]! + f * (x[k + 1]! - x[k]!);
  }
  return out;
}

function median(xs: number[]): number {
  const s = xs.slice().sort((a, b) => a - b);
  const m = s.length >> 1;
  return s.length % 2 ? s[m]! : (s[m - 1]! + s[m]!) / 2;
}

function side(t2: number[], q: number[], t2Lim: number, qLim: number): TransferSideStats {
  let t2Beyond = 0;
  let qBeyond = 0;
  let beyond = 0;
  for (let i = 0; i < t2.length; i++) {
    const a = t2[i]! > t2Lim;
    const b = q[i]! > qLim;
    if (a) t2Beyond++;
    if (b) qBeyond++;
    if (a || b) beyond++;
  }
  return { t2Beyond, qBeyond, beyond, rate: beyond / t2.length, interval: clopperPearson(beyond, t2.length), t2Median: median(t2), qMedian: median(q), t2Max: Math.max(...t2), qMax: Math.max(...q) };
}

const rms = (d: number[]) => (d.length ? Math.sqrt(d.reduce((s, v) => s + v * v, 0) / d.length) : NaN);
const pct = (v: number) => `${Number((v * 100).toPrecision(3))} %`;

/** Judge a transform on held-out transfer sets with the source model (see the file comment). */
export function judgeTransfer(source: MonitoringModel, t: Standardisation, heldOut: TransferSet[]): TransferJudgement {
  const oldAxis = source.chain.inputAxis;
  const p = source.chain.outputAxis.length;
  const proj = createProjector(source.pca);
  const xp = new Float64Array(p);
  const mid = new Float64Array(oldAxis.length);
  const stats = { old: { t2: [] as number[], q: [] as number[] }, before: { t2: [] as number[], q: [] as number[] }, after: { t2: [] as number[], q: [] as number[] } };
  const spec = { before: [] as number[], after: [] as number[] };
  const pls = source.pls;
  const prop = { before: [] as number[], after: [] as number[], labOld: [] as number[], labBefore: [] as number[], labAfter: [] as number[] };
  const judge = (raw: ArrayLike<number>, into: { t2: number[]; q: number[] }) => {
    source.chain.apply(raw, xp);
    const r = proj.project(xp);
    into.t2.push(r.t2);
    into.q.push(r.q);
  };
  const before = new Float64Array(oldAxis.length);
  for (const s of heldOut) {
    s.oldSpectra.forEach((xo, i) => {
      const xn = s.newSpectra[i]!;
      interpolateOnto(s.newAxis, xn, oldAxis, before);
      applyStandardisation(t, xn, mid);
      judge(xo, stats.old);
      judge(before, stats.before);
      judge(mid, stats.after);
      let sb = 0;
      let sa = 0;
      for (let j = 0; j < oldAxis.length; j++) {
        sb += (before[j]! - xo[j]!) ** 2;
        sa += (mid[j]! - xo[j]!) ** 2;
      }
      spec.before.push(Math.sqrt(sb / oldAxis.length));
      spec.after.push(Math.sqrt(sa / oldAxis.length));
      if (pls) {
        const yo = pls.predict(xo).y;
        const yb = pls.predict(before).y;
        const ya = pls.predict(mid).y;
        prop.before.push(yb - yo);
        prop.after.push(ya - yo);
        const lab = s.property?.[i];
        // Lab values outside the property model's calibration range say nothing about the transfer.
        if (lab !== undefined && Number.isFinite(lab) && (!pls.range || (lab >= pls.range[0] && lab <= pls.range[1]))) {
          prop.labOld.push(yo - lab);
          prop.labBefore.push(yb - lab);
          prop.labAfter.push(ya - lab);
        }
      }
    });
  }
  const t2Lim = source.limits.t2.value;
  const qLim = source.limits.q.value;
  const conf = source.limits.t2.confidence;
  const old = side(stats.old.t2, stats.old.q, t2Lim, qLim);
  const bef = side(stats.before.t2, stats.before.q, t2Lim, qLim);
  const aft = side(stats.after.t2, stats.after.q, t2Lim, qLim);
  // Nominal share beyond either of two limits at `conf`: at most 2(1 − conf) (Bonferroni).
  const nominal = 2 * (1 - conf);
  const reference = Math.max(nominal, old.rate);
  const farAbove = aft.interval[0] > reference && aft.rate > FAR_ABOVE_FACTOR * reference;
  const n = stats.old.t2.length;
  const rmsecv = pls?.rmsecv?.[pls.components - 1] ?? null;
  return {
    spectra: n,
    confidence: conf,
    t2Limit: t2Lim,
    qLimit: qLim,
    old,
    before: bef,
    after: aft,
    spectralRms: { before: rms(spec.before), after: rms(spec.after) },
    property: pls
      ? {
          name: pls.name,
          unit: pls.unit,
          vsOld: { before: rms(prop.before), after: rms(prop.after) },
          vsLab: prop.labOld.length ? { n: prop.labOld.length, old: rms(prop.labOld), before: rms(prop.labBefore), after: rms(prop.labAfter) } : null,
          rmsecv,
          off: rmsecv !== null && rms(prop.after) > rmsecv,
        }
      : null,
    farAbove,
    method:
      `${n} held-out transfer samples judged by the source version at its ${pct(conf)} T² and Q limits: the old analyzer's spectra; the new analyzer's interpolated linearly onto the old axis (before); ` +
      `and through the transform (after). Share beyond either limit with the exact (Clopper–Pearson) 95 % interval; nominal at most ${pct(nominal)}. ` +
      `"Far above" (approval needs evidenceOverride): the interval lies above the larger of nominal and the old analyzer's own share (${pct(reference)}) and the share is more than ${FAR_ABOVE_FACTOR} times it (common practice, no published source).` +
      (pls ? ` The ${pls.name} prediction after transfer is judged against the property model's own RMSECV: an RMS difference from the old analyzer's prediction above it needs evidenceOverride too (common practice, no published source).` : ''),
  };
}

/** The source model with a transform fitted on `opts.fit` and judged on `opts.heldOut`. */
export function fitTransfer(source: MonitoringModel, opts: TransferOptions): ModelTransfer {
  if (source.transfer) throw new RangeError(`model ${source.settings.name} already carries a calibration transfer; transfer from the version built on the old analyzer's reference batches`);
  if (opts.fit.length === 0) throw new RangeError('calibration transfer: give at least one transfer set to fit on');
  if (opts.heldOut.length === 0) throw new RangeError('calibration transfer: give at least one held-out transfer set to judge the transfer on');
  const oldAxis = source.chain.inputAxis;
  const newAxis = opts.fit[0]!.newAxis;
  for (const s of opts.fit) checkSet(s, oldAxis, newAxis, 'fit');
  for (const s of opts.heldOut) checkSet(s, oldAxis, newAxis, 'held out');
  const fitIds = new Set(opts.fit.flatMap((s) => [s.old, s.new]));
  const shared = opts.heldOut.flatMap((s) => [s.old, s.new]).filter((id) => fitIds.has(id));
  if (shared.length) throw new RangeError(`calibration transfer: batch ${shared[0]} is both fitted on and held out; a held-out set must be kept out of the fit`);
  const master = matrixFromRows(opts.fit.flatMap((s) => s.oldSpectra));
  const slave = matrixFromRows(opts.fit.flatMap((s) => s.newSpectra));
  const samples = { masterAxis: oldAxis, slaveAxis: newAxis, master, slave };
  const rcond = opts.rcond ?? 1e-6;
  const truncation = { rcond, ...(opts.maxRank !== undefined ? { maxRank: opts.maxRank } : {}) };
  let transform: Standardisation;
  if (opts.method === 'pds') {
    if (opts.window === undefined) throw new RangeError('calibration transfer: PDS needs a window (an odd number of new-analyzer pixels, e.g. 7)');
    transform = fitPiecewiseDirectStandardisation(samples, { ...truncation, window: opts.window });
  } else {
    if (opts.window !== undefined) throw new RangeError('calibration transfer: window is a PDS setting; DS has none');
    transform = fitDirectStandardisation(samples, truncation);
  }
  const judgement = judgeTransfer(source, transform, opts.heldOut);
  return {
    transform,
    settings: { method: opts.method, window: opts.method === 'pds' ? opts.window! : null, rcond, maxRank: opts.maxRank ?? null },
    source: { modelId: source.id, sha256: source.sha256, name: source.settings.name, version: opts.source.version, versionId: opts.source.versionId },
    fit: opts.fit.map((s) => ({ old: s.old, new: s.new, spectra: s.oldSpectra.length })),
    heldOut: opts.heldOut.map((s) => ({ old: s.old, new: s.new, spectra: s.oldSpectra.length })),
    judgement,
    createdAt: opts.createdAt,
    author: opts.author,
  };
}

const axisText = (a: ArrayLike<number>) => ({ points: a.length, from: a[0]!, to: a[a.length - 1]! });

export function calibrationTransferView(t: ModelTransfer): CalibrationTransferView {
  const tr = t.transform;
  const rank = tr.method === 'ds' ? { min: tr.rank, max: tr.rank } : { min: Math.min(...tr.ranks), max: Math.max(...tr.ranks) };
  return {
    method: t.settings.method, window: t.settings.window, rcond: t.settings.rcond, maxRank: t.settings.maxRank, rank,
    oldAxis: axisText(tr.masterAxis), newAxis: axisText(tr.slaveAxis),
    source: { ...t.source }, fit: t.fit.map((f) => ({ ...f })), heldOut: t.heldOut.map((f) => ({ ...f })), judgement: t.judgement,
    createdAt: t.createdAt, author: t.author, caution: TRANSFER_CAUTION,
  };
}

/** The approval warning of a transfer judged far above its reference rate (blocks approval without evidenceOverride), else null. */
export function transferBlockingWarning(t: ModelTransfer | undefined): ApprovalWarning | null {
  if (!t) return null;
  const j = t.judgement;
  const parts: string[] = [];
  if (j.farAbove) parts.push(`${pct(j.after.rate)} of the transferred spectra are beyond the T² or Q limit (exact 95 % interval ${pct(j.after.interval[0])}–${pct(j.after.interval[1])}), where the old analyzer has ${pct(j.old.rate)} on the same samples`);
  const p = j.property;
  if (p?.off) parts.push(`the predicted ${p.name} differs from the old analyzer's by ${p.vsOld.after.toPrecision(3)} ${p.unit} RMS, more than the property model's RMSECV (${p.rmsecv!.toPrecision(3)} ${p.unit})`);
  if (!parts.length) return null;
  return { code: 'transfer-far-off', blocking: true, text: `On the ${j.spectra} held-out transfer samples ${parts.join('; and ')}: the transfer does not carry the model over.` };
}
