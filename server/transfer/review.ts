/**
 * Review of a finished (or running) batch against the golden batches: the core comparison (DTW,
 * first exit, contributing regions) of the batch's stored spectra under the model that judged it,
 * and the data of the printable report.
 */
import { storedSpectrumProblem } from '../../core/protocol/plausibility.ts';
import type { BatchComparison } from '../../core/compare/compare-batch.ts';
import { compareBatch } from '../../core/compare/compare-batch.ts';
import type { MonitoringModel } from '../../core/model/monitoring-model.ts';
import type { MonitorResult } from '../../core/monitor/types.ts';
import { HttpProblem, notFound } from '../api/problem.ts';
import { batchDetail, modelVersionSummary } from '../api/views.ts';
import type { ServerContext } from '../context.ts';
import { envelopeView } from '../models/model-service.ts';
import type { BatchRow } from '../storage/storage.ts';
import type { BatchReportData, ReportDeparture } from './batch-report.ts';
import { endpointCheckView, endpointRuleView, propertyModelView } from '../../core/model/version-evidence.ts';

export async function loadBatch(ctx: ServerContext, id: string): Promise<BatchRow> {
  const b = await ctx.storage.getBatch(id);
  if (!b) throw notFound(`batch "${id}" does not exist`);
  return b;
}

/** The model a batch was judged by, or the one named; a clear problem when there is none. */
export async function modelFor(ctx: ServerContext, b: BatchRow, versionId?: string): Promise<{ id: string; model: MonitoringModel }> {
  const id = versionId ?? b.modelVersion;
  if (!id) {
    throw new HttpProblem(409, 'No model', `batch ${b.id} was not judged by a model (none was deployed to ${b.unit} when it started); name a model version to compare it with`, 'no-model');
  }
  const model = (await ctx.ingest.loadModel(id)) as unknown as MonitoringModel | null;
  if (!model) throw notFound(`model version "${id}" does not exist`);
  if (model.chain.inputAxis.length !== b.axis.length) {
    throw new HttpProblem(422, 'Axis mismatch', `batch ${b.id} has ${b.axis.length} wavelengths; model version ${id} expects ${model.chain.inputAxis.length}`, 'axis-mismatch');
  }
  return { id, model };
}

export async function compareStoredBatch(
  ctx: ServerContext,
  b: BatchRow,
  versionId?: string,
): Promise<{ versionId: string; comparison: BatchComparison; seqs: number[]; leftOut: { seq: number; why: string }[] }> {
  const { id, model } = await modelFor(ctx, b, versionId);
  const times: number[] = [];
  const seqs: number[] = [];
  const spectra: Float32Array[] = [];
  // /ingest refuses such spectra now; an older version (or import) may have stored them. They are
  // left out of the comparison and named, rather than failing the whole Review or report.
  const leftOut: { seq: number; why: string }[] = [];
  for await (const s of ctx.storage.iterateSpectra(b.id)) {
    const why = storedSpectrumProblem(s.t, s.values, times.length ? times[times.length - 1]! : -Infinity);
    if (why) {
      leftOut.push({ seq: s.seq, why });
      continue;
    }
    times.push(s.t);
    seqs.push(s.seq);
    spectra.push(s.values);
  }
  if (spectra.length === 0) {
    throw new HttpProblem(409, 'No spectra', `batch ${b.id} has no spectra ${leftOut.length ? `that can be judged (${leftOut.length} cannot: ${leftOut[0]!.why}, …)` : 'yet'}`, 'no-spectra');
  }
  return { versionId: id, comparison: compareBatch(model, { times, spectra }), seqs, leftOut };
}

async function allResults(ctx: ServerContext, batch: string): Promise<MonitorResult[]> {
  const out: MonitorResult[] = [];
  let from = 0;
  for (;;) {
    const page = await ctx.storage.readResults(batch, from, Number.MAX_SAFE_INTEGER, 5000);
    out.push(...page);
    if (page.length < 5000) return out;
    from = page[page.length - 1]!.seq + 1;
  }
}

function departureOf(c: BatchComparison, seqOfIndex: (i: number) => number): ReportDeparture {
  const exit = c.firstExit ?? null;
  const outside = c.firstOutside ?? null;
  return {
    firstExitT: exit ? exit.t : null,
    firstExitSeq: exit ? seqOfIndex(exit.index) : null,
    firstExitWhat: exit ? exit.message : null,
    firstOutside: outside && (!exit || outside.index < exit.index) ? { t: outside.t, seq: seqOfIndex(outside.index), what: outside.what } : null,
    window: c.departureWindow ? { fromSeq: seqOfIndex(c.departureWindow.from), toSeq: seqOfIndex(c.departureWindow.to) } : null,
    regions: c.regions.map((r) => ({ name: r.name, from: r.from, to: r.to, assignment: r.assignment, t2Share: r.t2Share, qShare: r.qShare })),
    alignedDeviation: c.aligned.pcs.map((p) => {
      const dev = p.deviation.filter((x) => Number.isFinite(x));
      return {
        pc: p.pc,
        meanAbs: dev.length ? dev.reduce((s, x) => s + Math.abs(x), 0) / dev.length : 0,
        maxAbs: dev.length ? Math.max(...dev.map(Math.abs)) : 0,
      };
    }),
  };
}

export async function reportData(ctx: ServerContext, batchId: string, user: string): Promise<BatchReportData> {
  const b = await loadBatch(ctx, batchId);
  const detail = await batchDetail(ctx.storage, ctx.ingest, b);
  const unit = await ctx.storage.getUnit(b.unit);
  const mrow = b.modelVersion ? await ctx.storage.getModelVersion(b.modelVersion) : null;
  const results = await allResults(ctx, b.id);
  let departure: ReportDeparture | null = null;
  let property: BatchReportData['property'] = null;
  if (mrow && results.length > 0) {
    const { comparison, seqs } = await compareStoredBatch(ctx, b);
    departure = departureOf(comparison, (i) => seqs[i] ?? i);
    const p = results.find((r) => r.prediction)?.prediction;
    if (p) property = { name: p.name, unit: p.unit };
  }
  return {
    generatedAt: ctx.now(),
    generatedBy: user,
    auditAnchor: (await ctx.audit?.anchor()) ?? null,
    batch: detail,
    unitName: unit?.name ?? b.unit,
    model: mrow ? await modelVersionSummary(ctx.storage, mrow) : null,
    envelope: mrow ? await envelopeView(ctx, mrow) : null,
    results,
    // The batch detail already carries the batch's alarms and endpoint events.
    alarms: detail.alarms,
    endpointEvents: detail.endpointEvents,
    departure,
    property,
    evidence: mrow ? await evidenceOf(ctx, mrow.id) : null,
    simulation: simulationOf(ctx, b.unit),
  };
}

/** The version's endpoint rule, property model and endpoint check, as the version detail shows them. */
async function evidenceOf(ctx: ServerContext, versionId: string): Promise<BatchReportData['evidence']> {
  const m = (await ctx.ingest.loadModel(versionId)) as unknown as MonitoringModel | null;
  if (!m) return null;
  return { endpoint: endpointRuleView(m), property: propertyModelView(m), endpointCheck: endpointCheckView(m) };
}

/** The demo's simulation flag for a unit's batches, as the report prints it; null for real data. */
function simulationOf(ctx: ServerContext, unit: string): BatchReportData['simulation'] {
  const sim = ctx.simulation;
  const u = sim?.units.find((x) => x.unit === unit);
  return sim && u ? { speedUp: u.speedUp, note: sim.note } : null;
}
