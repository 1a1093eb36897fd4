/**
 * Carrying a model version over to a new analyzer (core/calibration-transfer/transfer-model.ts):
 * the transfer sets are stored batches — the same samples measured on the old analyzer (one batch,
 * on the model's axis) and on the new one (another batch, on its own axis), row for row, imported
 * like any batch (POST /api/import, `tideline import`). The transform is fitted on the `fit` sets,
 * judged on the `heldOut` sets, and stored as a new draft version of the same model name, whose
 * file carries the transform and the judgement under its hash. Used by REST and the command line.
 */
import { randomUUID } from 'node:crypto';
import type { TransferModelRequest } from '../../core/api/rest.ts';
import { fitTransfer, type TransferSet } from '../../core/calibration-transfer/transfer-model.ts';
import { labPropertyArray, LabValueError, normalisePropertyName } from '../../core/lab/lab-values.ts';
import { parseMonitoringModel, serializeMonitoringModel, withTransfer, type MonitoringModel } from '../../core/model/monitoring-model.ts';
import type { ModelVersionRow, Storage } from '../storage/storage.ts';
import { requestProblem } from '../api/problem.ts';

async function loadSpectra(storage: Storage, id: string, role: string): Promise<{ axis: ArrayLike<number>; spectra: Float32Array[] }> {
  const b = await storage.getBatch(id);
  if (!b) throw requestProblem(404, `transfer batch "${id}" (${role}) does not exist; import it first (POST /api/import or tideline import)`);
  if (b.status !== 'ended') throw requestProblem(409, `transfer batch "${id}" is still open; only ended batches can be transfer sets`);
  const spectra: Float32Array[] = [];
  for await (const s of storage.iterateSpectra(id)) spectra.push(s.values);
  return { axis: b.axis, spectra };
}

/** Lab values of the model's property on a transfer set: the old batch's, else the new batch's (NaN where none). */
async function labOf(storage: Storage, model: MonitoringModel, ids: [string, string], n: number): Promise<Float64Array | undefined> {
  if (!model.pls) return undefined;
  const name = normalisePropertyName(model.pls.name);
  for (const id of ids) {
    try {
      const { values, count } = labPropertyArray(await storage.listLabValues(id), name, n, model.pls.unit);
      if (count > 0) return values;
    } catch (e) {
      if (e instanceof LabValueError) throw requestProblem(422, `transfer batch "${id}": ${e.message}`, 'Lab values in another unit', 'lab-unit-mismatch');
      throw e;
    }
  }
  return undefined;
}

async function loadSets(storage: Storage, model: MonitoringModel, pairs: { old: string; new: string }[]): Promise<TransferSet[]> {
  const out: TransferSet[] = [];
  for (const p of pairs) {
    const o = await loadSpectra(storage, p.old, 'old analyzer');
    const n = await loadSpectra(storage, p.new, 'new analyzer');
    const property = o.spectra.length === n.spectra.length ? await labOf(storage, model, [p.old, p.new], o.spectra.length) : undefined;
    out.push({ old: p.old, new: p.new, oldAxis: o.axis, newAxis: n.axis, oldSpectra: o.spectra, newSpectra: n.spectra, ...(property ? { property } : {}) });
  }
  return out;
}

/** Fit, judge and store a transferred version of `src`; the caller writes the audit record. */
export async function transferVersion(storage: Storage, src: ModelVersionRow, req: TransferModelRequest, user: string, now: number): Promise<ModelVersionRow> {
  if (src.status === 'retired') throw requestProblem(409, `model version ${src.name} v${src.version} is retired; transfer from a version in use`);
  const all = [...req.fit, ...req.heldOut].flatMap((p) => [p.old, p.new]);
  const twice = all.find((id, i) => all.indexOf(id) !== i);
  if (twice) throw requestProblem(400, `batch "${twice}" is named twice among the transfer sets; each set is two batches of its own, and a held-out set is kept out of the fit`);
  const source = parseMonitoringModel(src.body);
  const fit = await loadSets(storage, source, req.fit);
  const heldOut = await loadSets(storage, source, req.heldOut);
  let text: string;
  let moved: MonitoringModel;
  try {
    const transfer = fitTransfer(source, {
      method: req.method, ...(req.window !== undefined ? { window: req.window } : {}), ...(req.rcond !== undefined ? { rcond: req.rcond } : {}), ...(req.maxRank !== undefined ? { maxRank: req.maxRank } : {}),
      fit, heldOut, source: { versionId: src.id, version: src.version }, author: user, createdAt: now,
    });
    moved = withTransfer(source, transfer);
    text = serializeMonitoringModel(moved);
  } catch (e) {
    if (e instanceof RangeError) throw requestProblem(422, e.message, 'Transfer refused', 'transfer-refused');
    throw e;
  }
  const row: ModelVersionRow = {
    id: randomUUID(), name: src.name, version: await storage.nextModelVersion(src.name), product: src.product, sha256: moved.sha256, body: text,
    settings: src.settings, referenceBatches: src.referenceBatches, components: src.components, confidence: src.confidence, status: 'draft',
    createdAt: now, createdBy: user, approvedAt: null, approvedBy: null, approvalReason: null, retiredAt: null, retiredBy: null, retireReason: null,
  };
  await storage.insertModelVersion(row);
  return row;
}

/** What the audit record of a transfer keeps. */
export function transferAuditAfter(row: ModelVersionRow, src: ModelVersionRow, req: TransferModelRequest) {
  const j = parseMonitoringModel(row.body).transfer!.judgement;
  return {
    id: row.id, sha256: row.sha256, source: { id: src.id, sha256: src.sha256, version: src.version }, method: req.method, window: req.window ?? null,
    fit: req.fit, heldOut: req.heldOut,
    judgement: { spectra: j.spectra, beyondOld: j.old.beyond, beyondBefore: j.before.beyond, beyondAfter: j.after.beyond, farAbove: j.farAbove, propertyOff: j.property?.off ?? false },
  };
}
