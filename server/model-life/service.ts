/**
 * A model's life after approval, server side (docs/model-life.md): shadow runs of a candidate version
 * beside the deployed one, their comparison per batch, and the health of each deployed version —
 * shown on the Model bench and the Floor, exported to /metrics and raised as a low-priority alarm.
 * The computations are core's (core/shadow/compare.ts, core/health/model-health.ts); this file reads
 * storage and keeps per-batch figures of ended batches (they never change) in memory.
 */
import client from 'prom-client';
import type { ModelHealth, ShadowComparison, ShadowRun } from '../../core/api/model-life.ts';
import type { MonitoringModel } from '../../core/model/monitoring-model.ts';
import { createBatchMonitor } from '../../core/monitor/batch-monitor.ts';
import type { MonitorResult } from '../../core/monitor/types.ts';
import { healthBatchFigures, modelHealth, type HealthBatch, type RateBaseline } from '../../core/health/model-health.ts';
import { compareBatch, shadowComparison, type LabPoint } from '../../core/shadow/compare.ts';
import type { ServerContext } from '../context.ts';
import { latestApprovalEvidence } from '../models/model-service.ts';
import type { LabValueRow, ModelVersionRow } from '../storage/storage.ts';
import type { ModelLifeRepository, ShadowRunRow } from '../storage/repositories.ts';

/** Default periodic-review interval set at approval when the approver gives none (common practice: yearly review of a model; no published source). */
export const DEFAULT_REVIEW_DAYS = 365;
const DAY_MS = 86_400_000;
/** Spectra replayed between two yields to the event loop. */
const YIELD_EVERY = 100;

/** Effective lab values of a batch for one property: the latest of each chain of corrections. */
export function effectiveLab(rows: LabValueRow[], property: string): { idx: number; value: number }[] {
  const superseded = new Set(rows.map((r) => r.supersedes).filter((x): x is string => !!x));
  return rows.filter((r) => r.property === property && !superseded.has(r.id)).map((r) => ({ idx: r.spectrumIdx, value: r.value }));
}

export class ModelLife {
  readonly store: ModelLifeRepository;
  /** Per (version, ended batch): its figures and its predictions by spectrum index (a few kB). */
  private readonly figures = new Map<string, { figures: HealthBatch; predictions: Float64Array }>();
  private readonly refScores = new Map<string, Promise<number[][]>>();
  private refreshing: Promise<void> = Promise.resolve();
  private readonly gauges;

  constructor(private readonly ctx: ServerContext) {
    this.store = ctx.storage.modelLife;
    const reg = ctx.metrics.registry;
    const g = (name: string, help: string) => new client.Gauge({ name, help, labelNames: ['unit', 'model', 'version'], registers: [reg] });
    this.gauges = {
      failed: g('tideline_model_health_failed', 'Health tests of the version deployed on the unit that fail now (0: healthy)'),
      t2Rate: g('tideline_model_health_t2_beyond_ratio', 'Share of spectra judged after start-up beyond the T² alarm limit the monitor judges with, over the health window'),
      qRate: g('tideline_model_health_q_beyond_ratio', 'Share of spectra judged after start-up beyond the Q alarm limit the monitor judges with, over the health window'),
      nominal: g('tideline_model_health_nominal_ratio', 'Nominal share beyond an alarm limit (1 − its confidence)'),
      t2Batches: g('tideline_model_health_t2_batches_left_ratio', 'Share of the health window\'s batches that left the T² alarm limit (more than 2× nominal of their spectra beyond)'),
      qBatches: g('tideline_model_health_q_batches_left_ratio', 'Share of the health window\'s batches that left the Q alarm limit (more than 2× nominal of their spectra beyond)'),
      alarms: g('tideline_model_health_alarms_per_batch', 'Confirmed alarms per batch over the health window'),
      expected: g('tideline_model_health_alarms_per_batch_at_approval', 'Confirmed alarms per held-out good batch at approval'),
      drift: g('tideline_model_health_drift_ratio', 'Largest |EWMA| / limit of the batch-mean scores at the latest batch (above 1: drift)'),
      review: g('tideline_model_health_review_due_seconds', 'Seconds until the periodic review is due (negative: overdue)'),
    };
  }

  // ---- shadow runs -------------------------------------------------------------------------

  async runView(r: ShadowRunRow): Promise<ShadowRun> {
    const v = await this.ctx.storage.getModelVersion(r.modelVersion);
    return {
      id: r.id, unit: r.unit, versionId: r.modelVersion, name: v?.name ?? '?', version: v?.version ?? 0, deployedVersionId: r.deployedVersion,
      startedAt: r.startedAt, startedBy: r.startedBy, reason: r.reason, endedAt: r.endedAt, endedBy: r.endedBy, endReason: r.endReason,
      batches: await this.store.batchCount(r.id),
    };
  }

  async comparison(r: ShadowRunRow): Promise<ShadowComparison> {
    const candidate = (await this.ctx.ingest.loadModel(r.modelVersion)) as unknown as MonitoringModel | null;
    const compared = [];
    for (const b of await this.store.runBatches(r.id)) {
      if (b.status !== 'ended') continue;
      const shadow = await this.store.shadowResults(r.id, b.id);
      const primary = await this.store.results(b.id);
      const seqOf = new Map<number, number>();
      for (const x of [...primary, ...shadow]) seqOf.set(x.idx, x.result.seq);
      const deployedModel = b.modelVersion ? ((await this.ctx.ingest.loadModel(b.modelVersion)) as unknown as MonitoringModel | null) : null;
      const property = candidate?.pls?.name ?? deployedModel?.pls?.name ?? null;
      const lab: LabPoint[] = property
        ? effectiveLab(await this.ctx.storage.listLabValues(b.id), property).flatMap((l) => (seqOf.has(l.idx) ? [{ seq: seqOf.get(l.idx)!, value: l.value }] : []))
        : [];
      compared.push(compareBatch({ id: b.id, startT: b.startT }, { versionId: b.modelVersion, results: primary.map((x) => x.result) }, { versionId: r.modelVersion, results: shadow.map((x) => x.result) }, lab));
    }
    return shadowComparison(await this.runView(r), compared);
  }

  // ---- health ------------------------------------------------------------------------------

  private async batchFigures(batch: { id: string; startT: number }, model: MonitoringModel): Promise<HealthBatch> {
    // The results of an ended batch never change: read them once; lab values may be attached later, so they are read each time.
    const key = `${model.id}\u0000${batch.id}`;
    let hit = this.figures.get(key);
    if (!hit) {
      const rows = await this.store.results(batch.id);
      const f = healthBatchFigures(rows.map((x) => x.result), judgingOf(model));
      let alarms = 0;
      for (const x of rows) for (const c of x.result.conditionChanges) if (c.active && c.kind !== 'analyzer') alarms++;
      const predictions = new Float64Array(rows.length ? rows[rows.length - 1]!.idx + 1 : 0).fill(NaN);
      for (const x of rows) if (x.result.prediction && Number.isFinite(x.result.prediction.value)) predictions[x.idx] = x.result.prediction.value;
      hit = { figures: { id: batch.id, startT: batch.startT, ...f, alarms, labResiduals: [] }, predictions };
      this.figures.set(key, hit);
    }
    const labResiduals: number[] = [];
    if (model.pls) {
      for (const l of effectiveLab(await this.ctx.storage.listLabValues(batch.id), model.pls.name)) {
        const p = hit.predictions[l.idx];
        if (p !== undefined && Number.isFinite(p)) labResiduals.push(p - l.value);
      }
    }
    return { ...hit.figures, labResiduals };
  }

  /**
   * Batch-mean scores of the version's reference batches: stored in the model file at build; a file
   * built before that has none, and its reference batches are replayed once per version (per server
   * start) through its own monitor.
   */
  private referenceMeanScores(row: ModelVersionRow, model: MonitoringModel): Promise<number[][]> {
    if (model.meta.health) return Promise.resolve(model.meta.health.meanScores);
    let p = this.refScores.get(row.id);
    if (!p) {
      p = (async () => {
        const out: number[][] = [];
        for (const id of row.referenceBatches) {
          const b = await this.ctx.storage.getBatch(id);
          if (!b || b.axis.length !== model.chain.inputAxis.length) continue;
          const mon = createBatchMonitor(model, b.startT);
          const results: MonitorResult[] = [];
          let n = 0;
          for await (const sp of this.ctx.storage.iterateSpectra(id)) {
            results.push(mon.push(sp.seq, sp.t, sp.values));
            // yield to ingest and the sockets now and then: a version's first health replays all its reference batches
            if (++n % YIELD_EVERY === 0) await new Promise((r) => setImmediate(r));
          }
          const f = healthBatchFigures(results, judgingOf(model));
          if (f.spectra) out.push(f.meanScores);
        }
        return out;
      })();
      this.refScores.set(row.id, p);
      p.catch(() => this.refScores.delete(row.id));
    }
    return p;
  }

  async health(row: ModelVersionRow): Promise<ModelHealth> {
    const model = (await this.ctx.ingest.loadModel(row.id)) as unknown as MonitoringModel | null;
    if (!model) throw new Error(`model version ${row.id} cannot be read`);
    const batches: HealthBatch[] = [];
    let k = 0;
    for (const b of await this.store.batchesJudgedBy(row.id)) {
      batches.push(await this.batchFigures(b, model));
      if (++k % 20 === 0) await new Promise((r) => setImmediate(r));
    }
    const evidence = await latestApprovalEvidence(this.ctx, row.id);
    const review = await this.store.review(row.id);
    const units = (await this.ctx.storage.listDeployments({ active: true })).filter((d) => d.modelVersion === row.id).map((d) => d.unit).sort();
    return modelHealth({
      version: { id: row.id, name: row.name, version: row.version, confidence: model.limits.t2.confidence },
      rates: rateBaseline(model, evidence?.judged ?? null),
      units,
      batches,
      approval: evidence ? { alarms: evidence.alarmedGood.reduce((a, b) => a + b.alarms, 0), heldOut: evidence.heldOutGood.length } : null,
      referenceMeanScores: await this.referenceMeanScores(row, model),
      property: model.pls ? { name: model.pls.name, unit: model.pls.unit } : null,
      review: { dueAt: review?.dueAt ?? null, intervalDays: review?.intervalDays ?? null },
      now: this.ctx.now(),
    });
  }

  /** Health of the version deployed on a unit: metrics and the unit's health alarm. Serialised. */
  refreshUnit(unit: string): Promise<void> {
    const next = this.refreshing.then(() => this.refreshNow(unit)).catch((e) => this.ctx.log.error(`model health of unit ${unit} failed`, e));
    this.refreshing = next;
    return next;
  }

  private async refreshNow(unit: string): Promise<void> {
    const ref = this.ctx.ingest.deploymentRef(unit);
    if (!ref) {
      await this.ctx.ingest.setModelHealth(unit, false, `no version deployed on ${unit}: no model health to judge`, null, null);
      return;
    }
    const row = await this.ctx.storage.getModelVersion(ref.versionId);
    if (!row) return;
    const h = await this.health(row);
    const labels = { unit, model: row.name, version: String(row.version) };
    const failed = h.tests.filter((t) => t.failed);
    this.gauges.failed.set(labels, failed.length);
    if (h.t2) this.gauges.t2Rate.set(labels, h.t2.rate);
    if (h.q) this.gauges.qRate.set(labels, h.q.rate);
    if (h.t2) this.gauges.t2Batches.set(labels, h.t2.batches.share);
    if (h.q) this.gauges.qBatches.set(labels, h.q.batches.share);
    this.gauges.nominal.set(labels, h.t2 ? h.t2.nominal : 1 - row.confidence);
    this.gauges.alarms.set(labels, h.alarms.perBatch);
    if (h.alarms.expectedPerBatch !== null) this.gauges.expected.set(labels, h.alarms.expectedPerBatch);
    if (h.drift?.charts.length) {
      const last = (c: { ewma: number[]; limit: number[] }) => (c.ewma.length ? Math.abs(c.ewma[c.ewma.length - 1]!) / c.limit[c.limit.length - 1]! : 0);
      this.gauges.drift.set(labels, Math.max(...h.drift.charts.map(last)));
    }
    if (h.review.dueAt !== null) this.gauges.review.set(labels, (h.review.dueAt - this.ctx.now()) / 1000);
    const what = `${row.name} v${row.version} on ${unit}`;
    const message = failed.length
      ? `model health of ${what}: ${failed.map((t) => t.text).join(' ')} Review the version (Model bench); Tideline advises, the site's procedures decide.`
      : `model health of ${what}: every test passes again`;
    // The message changes with the figures every batch: the alarm is rewritten only when the failing tests change.
    // The alarm's value and limit: the figure of the first failing test and the value at which it fails (in the test's unit, named in the text).
    const first = failed.find((t) => t.value !== undefined && t.limit !== undefined && t.limit !== null);
    await this.ctx.ingest.setModelHealth(unit, failed.length > 0, failed.length ? `model health of ${what}: ${failed.map((t) => t.code).join(', ')} — ${message.slice(message.indexOf(': ') + 2)}` : message, first?.value ?? null, first?.limit ?? null);
  }

  /** Resolves when the refreshes asked for so far are done. */
  drain(): Promise<void> {
    return this.refreshing;
  }

  /** Set the periodic-review due date of a version; `within` is the approval's unit of work (its repository), so a refused signature sets none. */
  async setReview(versionId: string, intervalDays: number, at: number, by: string, within: ModelLifeRepository | null = this.store): Promise<number> {
    if (!within) throw new Error('this storage backend keeps no periodic reviews');
    const due = at + intervalDays * DAY_MS;
    await within.setReview(versionId, intervalDays, due, at, by);
    return due;
  }
}

/** Where the monitor raises its conditions, for counting spectra beyond its limits like it does. */
function judgingOf(model: MonitoringModel): { startupMin: number; limits: 'local' | 'global' } {
  return { startupMin: model.settings.alarms.startupMin ?? 0, limits: (model.settings.alarms.limits ?? 'local') === 'local' ? 'local' : 'global' };
}

/**
 * What the live T² and Q rates are compared with: the monitor's alarm limits, and the same share
 * measured before deployment — on the held-out good batches of the approval evidence when it counted
 * them as the monitor judges, else on the reference batches at build (model file), else none.
 */
export function rateBaseline(model: MonitoringModel, heldOut: { batches: number; points: number; t2Beyond: number; qBeyond: number; t2Batches: number; qBatches: number; confidence: number } | null): RateBaseline {
  const judging = judgingOf(model);
  const confidence = model.alarmLimits?.confidence ?? model.limits.t2.confidence;
  const ref = model.meta.health?.judged;
  const measured: RateBaseline['measured'] = heldOut && heldOut.points > 0 && heldOut.confidence === confidence
    ? { source: 'held-out', batches: heldOut.batches, points: heldOut.points, t2Beyond: heldOut.t2Beyond, qBeyond: heldOut.qBeyond, t2Batches: heldOut.t2Batches, qBatches: heldOut.qBatches }
    : ref && ref.points > 0 && ref.confidence === confidence && ref.startupMin === judging.startupMin && ref.limits === judging.limits
      ? { source: 'reference', batches: ref.batches, points: ref.points, t2Beyond: ref.t2Beyond, qBeyond: ref.qBeyond, t2Batches: ref.t2Batches, qBatches: ref.qBatches }
      : null;
  return { confidence, ...judging, measured };
}

const instances = new WeakMap<ServerContext, ModelLife>();

export function modelLifeOf(ctx: ServerContext): ModelLife {
  let m = instances.get(ctx);
  if (!m) instances.set(ctx, (m = new ModelLife(ctx)));
  return m;
}
