/**
 * The server's view of core's monitoring model and batch monitor
 * (core/model/monitoring-model.ts, core/monitor/batch-monitor.ts).
 * One place that imports them, so the rest of server/ depends only on the shapes below.
 */
import type { Contributions, DomainEvent, MonitorResult } from '../../core/monitor/types.ts';
import { createBatchMonitor } from '../../core/monitor/batch-monitor.ts';
import { buildMonitoringModel, parseMonitoringModel, serializeMonitoringModel } from '../../core/model/monitoring-model.ts';

export interface BatchMonitorLike {
  push(seq: number, t: number, values: Float32Array): MonitorResult;
  contributions(values: Float32Array): Contributions;
  markSignalled(t: number): DomainEvent | null;
}

/** The fields of C's MonitoringModel the server reads. */
export interface MonitoringModelLike {
  id: string;
  sha256: string;
  settings: { name: string; product: string; confidence: number; [k: string]: unknown };
  chain: { inputAxis: Float64Array; outputAxis: Float64Array };
  pca: { nComponents: number; explained: number[]; cumulative: number[] };
  limits: unknown;
  envelope: unknown;
  [k: string]: unknown;
}

export interface ReferenceBatchInput {
  id: string;
  axis: ArrayLike<number>;
  times: ArrayLike<number>;
  spectra: ArrayLike<number>[];
  property?: ArrayLike<number>;
}

export interface CoreMonitoring {
  createBatchMonitor(model: MonitoringModelLike, batchStartT: number): BatchMonitorLike;
  parseMonitoringModel(text: string): MonitoringModelLike;
  serializeMonitoringModel(m: MonitoringModelLike): string;
  buildMonitoringModel(batches: ReferenceBatchInput[], settings: Record<string, unknown>): MonitoringModelLike;
}

/** The core monitoring functions (core/ is imported statically: they are always there). */
export const coreMonitoring: CoreMonitoring = {
  createBatchMonitor: createBatchMonitor as unknown as CoreMonitoring['createBatchMonitor'],
  parseMonitoringModel: parseMonitoringModel as unknown as CoreMonitoring['parseMonitoringModel'],
  serializeMonitoringModel: serializeMonitoringModel as unknown as CoreMonitoring['serializeMonitoringModel'],
  buildMonitoringModel: buildMonitoringModel as unknown as CoreMonitoring['buildMonitoringModel'],
};

