/**
 * The server's view of engineer C's core monitoring model and batch monitor
 * (core/model/monitoring-model.ts, core/monitor/batch-monitor.ts; see /work/contracts.md).
 * One place that imports them, so the rest of server/ depends only on the shapes below.
 */
import type { Contributions, DomainEvent, MonitorResult } from '../../core/monitor/types.ts';

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

let loaded: Promise<CoreMonitoring> | null = null;

/** Loads the core monitoring functions once. Throws naming what is missing. */
export function coreMonitoring(): Promise<CoreMonitoring> {
  if (!loaded) {
    loaded = (async () => {
      // Paths held in variables: the modules are written in parallel by engineer C.
      const monitorPath = '../../core/monitor/batch-monitor.ts';
      const modelPath = '../../core/model/monitoring-model.ts';
      const [mon, mod] = await Promise.all([import(monitorPath), import(modelPath)]);
      for (const [name, fn] of [
        ['createBatchMonitor', mon.createBatchMonitor],
        ['parseMonitoringModel', mod.parseMonitoringModel],
        ['serializeMonitoringModel', mod.serializeMonitoringModel],
        ['buildMonitoringModel', mod.buildMonitoringModel],
      ] as const) {
        if (typeof fn !== 'function') throw new Error(`core monitoring: ${name} is not exported`);
      }
      return {
        createBatchMonitor: mon.createBatchMonitor,
        parseMonitoringModel: mod.parseMonitoringModel,
        serializeMonitoringModel: mod.serializeMonitoringModel,
        buildMonitoringModel: mod.buildMonitoringModel,
      } as CoreMonitoring;
    })();
    loaded.catch(() => {
      loaded = null;
    });
  }
  return loaded;
}
