/**
 * Runs inside a worker thread (server/models/build-runner.ts starts it): one model build per worker.
 * Receives the reference batches as packed typed arrays (the buffers are transferred, not copied or
 * turned into JSON), runs the pure core build, and answers with the serialized model file, its
 * hash and the few fields the server stores beside it. Errors are answered as messages; the main
 * thread turns them into problem details.
 */
import { parentPort } from 'node:worker_threads';
import { buildMonitoringModel, serializeMonitoringModel, type ReferenceBatch } from '../../core/model/monitoring-model.ts';

/** One reference batch as sent to the worker: `values` holds the spectra row by row (n × axis.length), as Float32 or Float64. */
export interface PackedReferenceBatch {
  id: string;
  axis: Float64Array;
  times: Float64Array;
  values: Float32Array | Float64Array;
  property?: Float64Array;
}

export interface BuildRequestMessage {
  batches: PackedReferenceBatch[];
  settings: Record<string, unknown>;
}

export type BuildReplyMessage =
  | { started: true; ok?: undefined }
  | { ok: true; body: string; sha256: string; settings: Record<string, unknown>; components: number }
  | { ok: false; error: string; name: string };

/** Spectra as row views on the packed values (no copy). */
export function unpackBatch(b: PackedReferenceBatch): ReferenceBatch {
  const p = b.axis.length;
  const n = p > 0 ? b.values.length / p : 0;
  const spectra: (Float32Array | Float64Array)[] = [];
  for (let i = 0; i < n; i++) spectra.push(b.values.subarray(i * p, (i + 1) * p));
  return { id: b.id, axis: b.axis, times: b.times, spectra, ...(b.property ? { property: b.property } : {}) };
}

export function runBuild(m: BuildRequestMessage): BuildReplyMessage {
  try {
    const model = buildMonitoringModel(m.batches.map(unpackBatch), m.settings);
    const body = serializeMonitoringModel(model);
    return { ok: true, body, sha256: model.sha256, settings: model.settings as unknown as Record<string, unknown>, components: model.pca.nComponents };
  } catch (e) {
    const err = e as Error;
    return { ok: false, error: String(err?.message ?? e), name: String(err?.name ?? 'Error') };
  }
}

/** Called by the worker's bootstrap: answer the one build request, then the worker ends. */
export function serveBuildWorker(): void {
  const port = parentPort;
  if (!port) throw new Error('serveBuildWorker runs only inside a worker thread');
  port.once('message', (m: BuildRequestMessage) => {
    port.postMessage({ started: true });
    port.postMessage(runBuild(m));
    port.close();
  });
}
