/** Builds the REST/live view objects (core/api) from storage rows and pipeline state. */
import type { AnalyzerSummary, BatchDetail, BatchSummary, Deployment, LabValueView, ModelRef, ModelVersionSummary } from '../../core/api/rest.ts';
import { labValueViews } from '../../core/lab/lab-values.ts';
import type { IngestPipeline } from '../ingest/pipeline.ts';
import { modelSignatures } from '../auth/model-signatures.ts';
import { batchEndStatement } from '../../core/monitor/batch-end.ts';
import { batchSuspectReasons } from '../../core/monitor/batch-suspect.ts';
import type { AnalyzerRow, BatchRow, DeploymentRow, ModelVersionRow, Storage } from '../storage/storage.ts';

export function modelRef(m: ModelVersionRow): ModelRef {
  return { versionId: m.id, name: m.name, version: m.version, sha256: m.sha256 };
}

export async function batchSummary(storage: Storage, pipeline: IngestPipeline, row: BatchRow): Promise<BatchSummary> {
  const model = row.modelVersion ? await storage.getModelVersion(row.modelVersion) : null;
  const all = await storage.listAlarms({ batch: row.id, limit: 0, offset: 0 });
  const active = await storage.listAlarms({ batch: row.id, active: true, limit: 0, offset: 0 });
  const ob = row.status === 'open' ? pipeline.openBatchById(row.id) : null;
  // Suspect and unjudged scans: the open batch's running counts, else counted from its stored results.
  const counted = ob ? { suspect: ob.suspectCount, unjudged: ob.unjudgedCount } : (await storage.scanCounts([row.id])).get(row.id);
  const end = batchEndStatement({ status: row.status, reportedReason: row.endReason, endpointState: ob ? ob.endpointState : row.endpointState, judged: row.modelVersion !== null });
  return {
    id: row.id, unit: row.unit, product: row.product, analyzer: row.analyzer, status: row.status, startedAt: row.startT,
    endedAt: row.endT, endReason: end.code === 'open' ? null : end.text, reportedEndReason: row.endReason, end: end.code === 'open' ? null : end,
    spectrumCount: ob ? ob.nextIdx : row.spectrumCount,
    firstSeq: (ob ? ob.nextIdx : row.spectrumCount) > 0 ? row.startSeq + 1 : null,
    lastSeq: ob ? (ob.nextIdx ? ob.lastSeq : null) : row.spectrumCount ? row.lastSeq : null,
    lastT: ob ? (ob.nextIdx ? ob.lastT : null) : row.spectrumCount ? row.lastT : null,
    model: model ? modelRef(model) : null,
    endpointState: ob ? ob.endpointState : row.endpointState,
    endpointAt: ob ? ob.endpointAt : row.endpointAt,
    alarmCount: all.total,
    activeAlarms: active.total,
    suspect: batchSuspectReasons({ status: row.status, alarmCount: all.total, endpointState: ob ? ob.endpointState : row.endpointState, judged: row.modelVersion !== null, reportedEndReason: row.endReason }),
    ...(row.modelVersion !== null ? { suspectCount: counted?.suspect ?? 0, unjudgedCount: counted?.unjudged ?? 0 } : {}),
  };
}

/** A batch's lab values as the API serves them (with their spectrum's time and whether each is in force). */
export async function batchLabValueViews(storage: Storage, row: BatchRow): Promise<LabValueView[]> {
  const rows = await storage.listLabValues(row.id);
  if (rows.length === 0) return [];
  return labValueViews(rows, await storage.spectrumTimes(row.id), row.startT);
}

export async function batchDetail(storage: Storage, pipeline: IngestPipeline, row: BatchRow): Promise<BatchDetail> {
  const s = await batchSummary(storage, pipeline, row);
  const ob = row.status === 'open' ? pipeline.openBatchById(row.id) : null;
  const latest = ob?.latest ?? (await storage.lastResult(row.id));
  const events = await storage.listEndpointEvents(row.id);
  const alarms = await storage.listAlarms({ batch: row.id, limit: 1000, offset: 0 });
  return {
    ...s,
    axis: Array.from(row.axis),
    latestResult: latest,
    endpoint: latest ? { ...latest.endpoint, state: s.endpointState ?? latest.endpoint.state } : null,
    endpointEvents: events,
    alarms: pipeline.withActivity(alarms.items),
    labValues: await batchLabValueViews(storage, row),
  };
}

export async function analyzerSummary(storage: Storage, pipeline: IngestPipeline, a: AnalyzerRow, remote: Map<string, string>): Promise<AnalyzerSummary> {
  const boot = await storage.latestAnalyzerBoot(a.id);
  const st = pipeline.streams.get(a.id);
  return {
    id: a.id, name: a.name, createdAt: a.createdAt, connected: pipeline.isConnected(a.id), boot: boot?.boot ?? null,
    lastSeenAt: boot?.lastSeen ?? null, instrument: boot?.instrument ?? null, axisPoints: boot ? boot.axis.length : null,
    axisRange: boot ? [boot.axis[0]!, boot.axis[boot.axis.length - 1]!] : null,
    lastSeq: st && boot && st.boot === boot.boot ? st.lastCommitted : boot?.lastSeq ?? null,
    remoteAddress: remote.get(a.id) ?? null,
  };
}

export async function modelVersionSummary(storage: Storage, m: ModelVersionRow): Promise<ModelVersionSummary> {
  const deps = await storage.listDeployments({ active: true });
  return {
    ...modelRef(m), product: m.product, status: m.status, createdAt: m.createdAt, createdBy: m.createdBy,
    approvedAt: m.approvedAt, approvedBy: m.approvedBy, approvalReason: m.approvalReason, retiredAt: m.retiredAt,
    retiredBy: m.retiredBy, retireReason: m.retireReason, referenceBatches: m.referenceBatches, components: m.components,
    confidence: m.confidence, deployedTo: deps.filter((d) => d.modelVersion === m.id).map((d) => d.unit),
    signatures: await modelSignatures(storage.signatures, m.id),
  };
}

export async function deploymentView(storage: Storage, d: DeploymentRow): Promise<Deployment> {
  const m = await storage.getModelVersion(d.modelVersion);
  return {
    id: d.id, unit: d.unit, model: m ? modelRef(m) : { versionId: d.modelVersion, name: '?', version: 0, sha256: '' },
    deployedAt: d.deployedAt, deployedBy: d.deployedBy, reason: d.reason, endedAt: d.endedAt, active: d.endedAt === null,
  };
}
