/**
 * Event-loop stall during a model build:
 * - build_loop_delay_main_vs_worker: the event loop's largest delay (perf_hooks
 *   monitorEventLoopDelay) while one model is built on the main thread (core buildMonitoringModel
 *   called directly, as before server/models/build-runner.ts) / the same while the same model is
 *   built in a worker thread by ModelBuildRunner. Larger is better for the worker.
 * - build_wall_worker_vs_main: wall time of the worker build (thread start and code loading
 *   included) / the main-thread build.
 * Data: simulated dryer reference batches (simulators/), 10 (--quick: 5), spectrum every 60 s.
 */
import { monitorEventLoopDelay } from 'node:perf_hooks';
import { simulateReferenceSet } from '../../simulators/batch.ts';
import { buildMonitoringModel, serializeMonitoringModel } from '../../core/model/monitoring-model.ts';
import { ModelBuildRunner, packReferenceBatch } from '../../server/models/build-runner.ts';

export const name = 'model-build-loop';

async function measure(f: () => Promise<unknown>): Promise<{ maxDelayMs: number; wallMs: number }> {
  const h = monitorEventLoopDelay({ resolution: 5 });
  // A timer keeps the loop ticking so that a stall shows up as delay.
  const tick = setInterval(() => {}, 5);
  h.enable();
  const t0 = performance.now();
  await f();
  const wallMs = performance.now() - t0;
  await new Promise((r) => setTimeout(r, 20));
  h.disable();
  clearInterval(tick);
  return { maxDelayMs: h.max / 1e6, wallMs };
}

export async function run(ctx: { quick: boolean; log: (l: string) => void }): Promise<Record<string, number | string>> {
  const refs = simulateReferenceSet('dryer', ctx.quick ? 5 : 10, 4201, { intervalS: 60 });
  const batches = refs.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra }));
  const settings = { name: 'bench', product: 'granule A', author: 'bench', createdAt: 0, components: 3 };
  let mainHash = '';
  let workerHash = '';
  const main = await measure(async () => {
    await new Promise((r) => setTimeout(r, 20));
    const m = buildMonitoringModel(batches, settings);
    serializeMonitoringModel(m);
    mainHash = m.sha256;
  });
  const runner = new ModelBuildRunner({ maxConcurrent: 1, timeoutMs: 600_000, maxHeapMb: null });
  const info = { name: 'bench', product: 'granule A', startedBy: 'bench', startedAt: 0, referenceBatches: batches.length };
  const worker = await measure(async () => {
    const out = await runner.build(info, batches.map(packReferenceBatch), settings);
    workerHash = out.sha256;
  });
  if (mainHash !== workerHash) throw new Error(`the worker built a different model (sha256 ${workerHash} vs ${mainHash})`);
  ctx.log(`${refs.length} dryer reference batches, ${refs.reduce((n, b) => n + b.spectra.length, 0)} spectra; same sha256 ${mainHash.slice(0, 12)}…`);
  ctx.log(`main thread: max loop delay ${main.maxDelayMs.toFixed(0)} ms, build ${main.wallMs.toFixed(0)} ms`);
  ctx.log(`worker:      max loop delay ${worker.maxDelayMs.toFixed(1)} ms, build ${worker.wallMs.toFixed(0)} ms (thread start included)`);
  return {
    build_loop_delay_main_vs_worker: main.maxDelayMs / worker.maxDelayMs,
    build_wall_worker_vs_main: worker.wallMs / main.wallMs,
  };
}
