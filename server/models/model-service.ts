/**
 * Model versions on the server: build from stored reference batches (core buildMonitoringModel, run
 * in a worker thread by build-runner.ts), register an immutable version with its hash, evaluate a version by replaying stored batches.
 */
import { requestProblem } from '../api/problem.ts';
import { randomUUID } from 'node:crypto';
import type { ApprovalEvidence, BatchEvaluation, EvaluationResult, ModelEnvelopeView, ModelReferencesView, ModelVersionDetail } from '../../core/api/rest.ts';
import type { ServerContext } from '../context.ts';
import type { MonitoringModelLike, ReferenceBatchInput } from '../monitor/core-monitor.ts';
import type { ModelVersionRow } from '../storage/storage.ts';
import { modelVersionSummary } from '../api/views.ts';
import { spreadIndices } from '../../core/stats/spread-indices.ts';
import { BuildBusyError, BuildFailedError, ModelBuildRunner, packReferenceBatch, type BuildInfo, type BuiltModelFile } from './build-runner.ts';
import type { PackedReferenceBatch } from './build-worker.ts';
import type { MonitoringModel } from '../../core/model/monitoring-model.ts';
import { approvalEvidence } from '../../core/evaluate/approval-evidence.ts';
import { earlyBatchesText } from '../../core/model/endpoint-check.ts';
import { endpointCheckView, endpointRuleView, propertyModelView, referenceEndpointsView } from '../../core/model/version-evidence.ts';
import { labPropertyArray, LabValueError, normalisePropertyName } from '../../core/lab/lab-values.ts';
import { calibrationTransferView } from '../../core/calibration-transfer/transfer-model.ts';

interface ModelShape extends MonitoringModelLike {
  limits: { t2: { value: number; confidence: number; method: string }; q: { value: number; confidence: number; method: string; note?: string }; combined?: { value: number } };
  meta: { notes?: string[] };
  alarmLimits?: { confidence: number; t2: { value: number }; q: { value: number }; combined: { value: number }; envelopeK: number; envelopeKMethod: string };
  envelope: { grid: number[]; pcs: { mean: number[]; lower: number[]; upper: number[] }[]; t2Limit: number[]; qLimit: number[] };
}

/** Store a built model as a new draft version of its name. */
export async function registerModel(ctx: ServerContext, model: MonitoringModelLike, opts: { createdBy: string; referenceBatches: string[] }): Promise<ModelVersionRow> {
  const core = await ctx.ingest.getCore();
  const file: BuiltModelFile = { body: core.serializeMonitoringModel(model), sha256: model.sha256, settings: model.settings, components: model.pca.nComponents };
  return registerModelFile(ctx, file, opts);
}

/** Store a model file built elsewhere (the build worker) as a new draft version: the same row registerModel writes. */
export async function registerModelFile(ctx: ServerContext, file: BuiltModelFile, opts: { createdBy: string; referenceBatches: string[] }): Promise<ModelVersionRow> {
  const s = file.settings;
  const name = String(s.name);
  const row: ModelVersionRow = {
    id: randomUUID(), name, version: await ctx.storage.nextModelVersion(name), product: String(s.product), sha256: file.sha256, body: file.body,
    settings: s, referenceBatches: opts.referenceBatches, components: file.components,
    confidence: Number(s.confidence), status: 'draft', createdAt: ctx.now(), createdBy: opts.createdBy, approvedAt: null,
    approvedBy: null, approvalReason: null, retiredAt: null, retiredBy: null, retireReason: null,
  };
  await ctx.storage.insertModelVersion(row);
  return row;
}

/**
 * A stored batch as a reference batch for a build. With `property` (the build's property model,
 * settings.property), `property` is filled from the batch's effective lab values of that property:
 * one entry per spectrum, NaN where the spectrum has no lab value (sparse; a batch without any has
 * all NaN). A lab value in another unit than the build's is refused (422), naming it.
 */
export async function loadReferenceBatch(ctx: ServerContext, id: string, property?: { name: string; unit?: string }): Promise<ReferenceBatchInput> {
  const b = await ctx.storage.getBatch(id);
  if (!b) throw requestProblem(404, `reference batch "${id}" does not exist`);
  if (b.status !== 'ended') throw requestProblem(409, `reference batch "${id}" is still open; only ended batches can be references`);
  const times: number[] = [];
  const spectra: Float32Array[] = [];
  for await (const s of ctx.storage.iterateSpectra(id)) {
    times.push(s.t);
    spectra.push(s.values);
  }
  if (!property) return { id, axis: b.axis, times, spectra };
  const name = normalisePropertyName(property.name);
  try {
    const { values } = labPropertyArray(await ctx.storage.listLabValues(id), name, spectra.length, property.unit);
    return { id, axis: b.axis, times, spectra, property: values };
  } catch (e) {
    if (e instanceof LabValueError) throw requestProblem(422, `reference batch "${id}": ${e.message}`, 'Lab values in another unit', 'lab-unit-mismatch');
    throw e;
  }
}

const runners = new WeakMap<ServerContext, ModelBuildRunner>();

/** The server's model build runner (created on first use; its workers are stopped when the server closes). */
export function buildRunnerOf(ctx: ServerContext): ModelBuildRunner {
  let r = runners.get(ctx);
  if (!r) {
    const runner = new ModelBuildRunner(() => ctx.config.modelBuild);
    runners.set(ctx, runner);
    ctx.onClose(() => runner.stop());
    r = runner;
  }
  return r;
}

/**
 * Build a draft version from stored reference batches in a worker thread (server/models/build-runner.ts):
 * the event loop stays free for ingest, /live and signals while core computes. At most
 * config.modelBuild.maxConcurrent builds run at once; a request beyond that is refused (409).
 */
export async function buildFromStored(
  ctx: ServerContext,
  req: { name: string; product: string; referenceBatches: string[]; settings?: Record<string, unknown> },
  user: string,
): Promise<ModelVersionRow> {
  const runner = buildRunnerOf(ctx);
  const info: BuildInfo = { name: req.name, product: req.product, startedBy: user, startedAt: ctx.now(), referenceBatches: req.referenceBatches.length };
  let release: () => void;
  try {
    release = runner.acquire(info);
  } catch (e) {
    if (e instanceof BuildBusyError) throw requestProblem(409, e.message, 'Model build running', 'model-build-busy');
    throw e;
  }
  try {
    const batches: PackedReferenceBatch[] = [];
    const property = (req.settings as { property?: { name?: unknown; unit?: unknown } } | undefined)?.property;
    const wanted = property && typeof property.name === 'string' ? { name: property.name, unit: typeof property.unit === 'string' ? property.unit : undefined } : undefined;
    for (const id of req.referenceBatches) batches.push(packReferenceBatch(await loadReferenceBatch(ctx, id, wanted)));
    let file: BuiltModelFile;
    try {
      file = await runner.build(info, batches, { ...(req.settings ?? {}), name: req.name, product: req.product, author: user, createdAt: ctx.now() });
    } catch (e) {
      if (e instanceof BuildFailedError && e.kind === 'model') throw requestProblem(422, `the model could not be built: ${e.message}`);
      if (e instanceof BuildFailedError) throw requestProblem(500, `the model could not be built: ${e.message}; the server goes on`, 'Model build failed', 'model-build-failed');
      throw e;
    }
    return await registerModelFile(ctx, file, { createdBy: user, referenceBatches: req.referenceBatches });
  } finally {
    release();
  }
}

export async function evaluateVersion(ctx: ServerContext, versionId: string, batchIds: string[], user: string, faulty: string[] = []): Promise<EvaluationResult> {
  const unknownFaulty = faulty.filter((f) => !batchIds.includes(f));
  if (unknownFaulty.length) throw requestProblem(400, `faulty lists ${unknownFaulty.join(', ')}, which ${unknownFaulty.length === 1 ? 'is' : 'are'} not among the batches evaluated`);
  const row = await ctx.storage.getModelVersion(versionId);
  const core = await ctx.ingest.getCore();
  const model = (await ctx.ingest.loadModel(versionId)) as ModelShape | null;
  if (!model) throw requestProblem(404, `model version "${versionId}" does not exist`);
  const out: BatchEvaluation[] = [];
  for (const id of batchIds) {
    const b = await ctx.storage.getBatch(id);
    if (!b) throw requestProblem(404, `batch "${id}" does not exist`);
    if (b.axis.length !== model.chain.inputAxis.length) {
      throw requestProblem(422, `batch "${id}" has ${b.axis.length} wavelengths; the model expects ${model.chain.inputAxis.length}`);
    }
    const mon = core.createBatchMonitor(model, b.startT);
    const ev: BatchEvaluation = { batch: id, spectra: 0, pointsOutside: 0, alarms: 0, firstAlarmAt: null, firstAlarmKind: null, endpointAt: null, maxT2: 0, maxQ: 0, t2Beyond: 0, qBeyond: 0, judged: { points: 0, t2Beyond: 0, qBeyond: 0, confidence: model.alarmLimits?.confidence ?? model.limits.t2.confidence } };
    const startupMin = (model.settings as { alarms?: { startupMin?: number } }).alarms?.startupMin ?? 0;
    for await (const s of ctx.storage.iterateSpectra(id)) {
      const r = mon.push(s.seq, s.t, s.values);
      ev.spectra++;
      // As the monitor judges (model health compares live batches with this): its alarm limits, after start-up.
      if (r.alarmLimits && Number.isFinite(r.t2) && r.elapsedMin >= startupMin) {
        ev.judged!.points++;
        if (r.t2 > r.alarmLimits.t2) ev.judged!.t2Beyond++;
        if (r.q > r.alarmLimits.q) ev.judged!.qBeyond++;
      }
      if (r.t2 > r.limits.t2 || r.q > r.limits.q) ev.pointsOutside++;
      if (r.t2 > r.limits.t2) ev.t2Beyond!++;
      if (r.q > r.limits.q) ev.qBeyond!++;
      for (const c of r.conditionChanges) {
        if (!c.active) continue;
        ev.alarms++;
        if (ev.firstAlarmAt === null) {
          ev.firstAlarmAt = r.t;
          ev.firstAlarmKind = c.key;
        }
      }
      if (ev.endpointAt === null && (r.endpoint.state === 'done' || r.endpoint.state === 'signalled')) ev.endpointAt = r.endpoint.doneAt?.t ?? r.t;
      ev.maxT2 = Math.max(ev.maxT2, r.t2);
      ev.maxQ = Math.max(ev.maxQ, r.q);
    }
    out.push(ev);
  }
  const result: EvaluationResult = { id: randomUUID(), versionId, createdAt: ctx.now(), createdBy: user, batches: out, faulty: [...new Set(faulty)] };
  result.evidence = evidenceOf(result, model, row?.referenceBatches ?? []);
  await ctx.storage.insertEvaluation(result);
  return result;
}

function evidenceOf(e: EvaluationResult, model: ModelShape, references: string[]): ApprovalEvidence {
  const check = (model as unknown as MonitoringModel).meta?.endpointCheck;
  return approvalEvidence({
    evaluationId: e.id, createdAt: e.createdAt, confidence: model.limits.t2.confidence, batches: e.batches, faulty: e.faulty ?? [], references,
    earlyCalls: { count: check?.early ?? 0, text: check && check.early > 0 ? earlyBatchesText(check) : null },
  });
}

/**
 * The approval evidence of a version: from its latest evaluation that carries one (evaluations
 * stored before point counts per limit were kept have none); null when it has none.
 */
export async function latestApprovalEvidence(ctx: ServerContext, versionId: string): Promise<ApprovalEvidence | null> {
  const evals = (await ctx.storage.listEvaluations(versionId)).filter((e) => e.evidence);
  if (!evals.length) return null;
  return evals.reduce((a, b) => (b.createdAt >= a.createdAt ? b : a)).evidence!;
}

/** How the version's PCA component count was chosen (ModelVersionDetail.pca). */
function pcaChoiceView(m: MonitoringModel): NonNullable<ModelVersionDetail['pca']> {
  const cv = m.meta.pcaCv;
  const auto = m.settings.components === 'auto';
  return { components: m.pca.nComponents, chosenBy: auto ? 'auto' : 'fixed', rule: auto ? (cv.rule ?? null) : null, searched: cv.press.length, atSearchLimit: auto && (cv.atSearchLimit ?? m.pca.nComponents === cv.press.length), press: cv.press };
}

export async function versionDetail(ctx: ServerContext, row: ModelVersionRow): Promise<ModelVersionDetail> {
  const model = (await ctx.ingest.loadModel(row.id)) as ModelShape | null;
  const full = model as unknown as MonitoringModel | null;
  const summary = await modelVersionSummary(ctx.storage, row);
  return {
    ...summary,
    settings: row.settings,
    explained: model ? model.pca.explained : [],
    cumulative: model ? model.pca.cumulative : [],
    ...(full ? { pca: pcaChoiceView(full) } : {}),
    limits: model
      ? { t2: model.limits.t2.value, q: model.limits.q.value, combined: model.limits.combined?.value ?? null, confidence: model.limits.t2.confidence, t2Method: model.limits.t2.method, qMethod: model.limits.q.note ? `${model.limits.q.method} — ${model.limits.q.note}` : model.limits.q.method }
      : { t2: NaN, q: NaN, combined: null, confidence: row.confidence, t2Method: '', qMethod: '' },
    alarmLimits: model?.alarmLimits
      ? { t2: model.alarmLimits.t2.value, q: model.alarmLimits.q.value, combined: model.alarmLimits.combined.value, confidence: model.alarmLimits.confidence, envelopeK: model.alarmLimits.envelopeK, envelopeKMethod: model.alarmLimits.envelopeKMethod }
      : null,
    modelAxis: model ? Array.from(model.chain.outputAxis) : [],
    evaluations: await ctx.storage.listEvaluations(row.id),
    notes: model?.meta.notes ?? [],
    endpoint: full ? endpointRuleView(full) : null,
    property: full ? propertyModelView(full) : null,
    referenceEndpoints: full ? referenceEndpointsView(full) : [],
    endpointCheck: full ? endpointCheckView(full) : null,
    transfer: full?.transfer ? calibrationTransferView(full.transfer) : null,
  };
}

export async function envelopeView(ctx: ServerContext, row: ModelVersionRow): Promise<ModelEnvelopeView> {
  const model = (await ctx.ingest.loadModel(row.id)) as ModelShape | null;
  if (!model) throw requestProblem(503, 'batch monitoring is not available on this server');
  const progress = (model.settings as { progress?: { kind: string; source?: string } }).progress ?? { kind: 'time' };
  const env = model.envelope;
  return {
    versionId: row.id,
    progressKind: progress.kind === 'indicator' ? 'indicator' : 'time',
    progressUnit: progressUnitOf(model),
    progress: env.grid,
    scores: env.pcs.map((p, i) => ({ pc: i + 1, expected: p.mean, lower: p.lower, upper: p.upper })),
    local: env.t2Limit?.length ? { t2: env.t2Limit, q: env.qLimit } : null,
    limits: { t2: model.limits.t2.value, q: model.limits.q.value, combined: model.limits.combined?.value ?? null, confidence: model.limits.t2.confidence },
    // drawn from GET …/references (referencesView), which replays the reference batches: kept out
    // of this answer so the envelope comes at once
    references: [],
  };
}

/** The reference batches' paths of a version (GET /api/models/versions/:version/references). */
export async function referencesView(ctx: ServerContext, row: ModelVersionRow): Promise<ModelReferencesView> {
  const model = (await ctx.ingest.loadModel(row.id)) as ModelShape | null;
  if (!model) throw requestProblem(503, 'batch monitoring is not available on this server');
  return { versionId: row.id, references: await referenceTrajectories(ctx, row, model) };
}

/** Points kept per reference batch in the envelope view (evenly spaced, first and last kept). */
const REFERENCE_POINTS = 200;
/** Reference batches drawn at most (evenly chosen when a model has more). */
const REFERENCE_BATCHES = 30;
const referenceCache = new WeakMap<ServerContext, Map<string, ModelEnvelopeView['references']>>();

/**
 * The reference batches' paths on the model's own progress axis: each stored reference batch replayed
 * through a batch monitor of this version (so progress and scores are exactly what the live monitor
 * would have shown), thinned to REFERENCE_POINTS points. A version is immutable, so the result is
 * kept per version for the life of the server. Reference batches no longer stored (imported
 * elsewhere, deleted) or on another wavelength axis are left out.
 */
async function referenceTrajectories(ctx: ServerContext, row: ModelVersionRow, model: ModelShape): Promise<ModelEnvelopeView['references']> {
  let cache = referenceCache.get(ctx);
  if (!cache) referenceCache.set(ctx, (cache = new Map()));
  const hit = cache.get(row.id);
  if (hit) return hit;
  const core = await ctx.ingest.getCore();
  const ids = row.referenceBatches;
  const chosen = spreadIndices(ids.length, REFERENCE_BATCHES).map((i) => ids[i]!);
  const out: ModelEnvelopeView['references'] = [];
  for (const id of chosen) {
    const b = await ctx.storage.getBatch(id);
    if (!b || b.axis.length !== model.chain.inputAxis.length) continue;
    const mon = core.createBatchMonitor(model, b.startT);
    const progress: number[] = [];
    const scores: number[][] = [];
    for await (const sp of ctx.storage.iterateSpectra(id)) {
      const r = mon.push(sp.seq, sp.t, sp.values);
      progress.push(r.progress);
      scores.push(r.scores);
    }
    if (progress.length === 0) continue;
    const keep = spreadIndices(progress.length, REFERENCE_POINTS);
    out.push({ batch: id, progress: keep.map((i) => progress[i]!), scores: keep.map((i) => scores[i]!) });
  }
  cache.set(row.id, out);
  return out;
}

/**
 * The unit of the envelope's progress axis, in words a reader can check against the numbers: minutes,
 * or the indicator with its orientation — a falling property (moisture while drying) is negated so
 * that progress rises, and the label says so ("−moisture, % w/w").
 */
function progressUnitOf(model: ModelShape): string {
  const axis = (model.envelope as unknown as { axis?: { kind: string; source?: string; sign?: number } }).axis;
  if (!axis || axis.kind !== 'indicator') return 'min';
  const minus = axis.sign === -1 ? '−' : '';
  if (axis.source === 'property') {
    const p = (model.settings as { property?: { name?: string; unit?: string } }).property;
    return `${minus}predicted ${p?.name ?? 'property'}${p?.unit ? `, ${p.unit}` : ''}`;
  }
  return `${minus}PC1 score`;
}
