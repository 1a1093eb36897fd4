/**
 * Model builds in worker threads. A build (core buildMonitoringModel) is seconds of pure computation;
 * on the main thread it would stall ingest acks, /live pushes, the OPC UA heartbeat and signal
 * delivery for all that time. Here each build runs in a fresh worker thread: the reference spectra
 * go over as transferred typed-array buffers, the model file comes back as text with its hash.
 *
 * At most `maxConcurrent` builds run at once; a further request is refused at once with
 * BuildBusyError (the API answers 409 and names the running build) rather than queued, so a
 * client never waits minutes behind builds it cannot see.
 *
 * The worker loads the TypeScript build code through tsx's tsImport (a dependency), so it runs the
 * same way under `npm start` (tsx), `npm run tideline`, vitest and the benchmarks.
 */
import { EventEmitter } from 'node:events';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { Worker } from 'node:worker_threads';
import type { BuildReplyMessage, BuildRequestMessage, PackedReferenceBatch } from './build-worker.ts';

export interface BuildInfo {
  name: string;
  product: string;
  startedBy: string;
  startedAt: number;
  referenceBatches: number;
  /** 'loading': reading the reference batches; 'building': the worker has the data and is computing. */
  phase?: 'loading' | 'building';
}

export interface BuiltModelFile {
  body: string;
  sha256: string;
  settings: Record<string, unknown>;
  components: number;
}

/** Another build holds every slot. */
export class BuildBusyError extends Error {
  override name = 'BuildBusyError';
  constructor(readonly running: BuildInfo[]) {
    super(
      `a model build is already running (${running.map((b) => `"${b.name}" started by ${b.startedBy} at ${new Date(b.startedAt).toISOString()}`).join('; ')}); ` +
        `this server runs at most ${running.length} at a time — try again when it has finished`,
    );
  }
}

/**
 * The build did not give a model. `kind`: 'model' — core refused the data or settings (the message
 * says why); 'worker' — the worker thread failed (crash, out of memory, could not start);
 * 'timeout' — it ran longer than allowed and was stopped.
 */
export class BuildFailedError extends Error {
  override name = 'BuildFailedError';
  constructor(readonly kind: 'model' | 'worker' | 'timeout', message: string) {
    super(message);
  }
}

export interface BuildRunnerOptions {
  /** Builds at the same time (each takes one core while it runs). */
  maxConcurrent: number;
  /** Stop a build after this long, ms. */
  timeoutMs: number;
  /** V8 old-generation heap limit of a build worker, MiB (null = Node's default). */
  maxHeapMb: number | null;
}

// tsx's ESM API (its CommonJS build of tsImport does not find its own files when loaded by path).
const TSX_API = pathToFileURL(join(dirname(createRequire(import.meta.url).resolve('tsx/package.json')), 'dist/esm/api/index.mjs')).href;
const ENTRY = new URL('./build-worker.ts', import.meta.url).href;

const BOOTSTRAP = `
const { workerData } = require('node:worker_threads');
import(workerData.tsxApi)
  .then((api) => api.tsImport(workerData.entry, workerData.entry))
  .then((m) => m.serveBuildWorker());
`;

/** Emits 'building' (info) when a worker has received its data and starts computing. */
export class ModelBuildRunner extends EventEmitter {
  private readonly active = new Set<BuildInfo>();
  private readonly workers = new Set<Worker>();

  private readonly options: () => BuildRunnerOptions;

  /** `options` is read at each request, so a changed configuration applies to the next build. */
  constructor(options: BuildRunnerOptions | (() => BuildRunnerOptions)) {
    super();
    this.options = typeof options === 'function' ? options : () => options;
  }

  /** Builds running now. */
  running(): BuildInfo[] {
    return [...this.active];
  }

  /**
   * Take a build slot (throws BuildBusyError when none is free). Call before reading the reference
   * batches so a refused request costs nothing; `release` must be called when done.
   */
  acquire(info: BuildInfo): () => void {
    if (this.active.size >= this.options().maxConcurrent) throw new BuildBusyError(this.running());
    info.phase = 'loading';
    this.active.add(info);
    let released = false;
    return () => {
      if (released) return;
      released = true;
      this.active.delete(info);
    };
  }

  /**
   * Run one build in a fresh worker (`info`: the slot's description from acquire). The typed arrays'
   * buffers are transferred, so they are unusable here afterwards.
   */
  build(info: BuildInfo, batches: PackedReferenceBatch[], settings: Record<string, unknown>): Promise<BuiltModelFile> {
    const opts = this.options();
    const transfer = new Set<ArrayBuffer>();
    for (const b of batches) for (const a of [b.axis, b.times, b.values, b.property]) if (a && a.buffer instanceof ArrayBuffer) transfer.add(a.buffer);
    let w: Worker;
    try {
      w = new Worker(BOOTSTRAP, {
        eval: true,
        workerData: { tsxApi: TSX_API, entry: ENTRY },
        ...(opts.maxHeapMb ? { resourceLimits: { maxOldGenerationSizeMb: opts.maxHeapMb } } : {}),
      });
    } catch (e) {
      return Promise.reject(new BuildFailedError('worker', `the model build worker could not be started: ${(e as Error).message}`));
    }
    this.workers.add(w);
    return new Promise<BuiltModelFile>((resolve, reject) => {
      let settled = false;
      const finish = (f: () => void) => {
        if (settled) return;
        settled = true;
        clearTimeout(timer);
        this.workers.delete(w);
        f();
        void w.terminate();
      };
      const timer = setTimeout(
        () => finish(() => reject(new BuildFailedError('timeout', `the model build ran longer than ${opts.timeoutMs >= 1000 ? `${Math.round(opts.timeoutMs / 1000)} s` : `${opts.timeoutMs} ms`} (modelBuild.timeoutMs) and was stopped`))),
        opts.timeoutMs,
      );
      w.on('message', (m: BuildReplyMessage) => {
        if ('started' in m) {
          info.phase = 'building';
          this.emit('building', info);
          return;
        }
        if (m.ok) finish(() => resolve({ body: m.body, sha256: m.sha256, settings: m.settings, components: m.components }));
        else finish(() => reject(new BuildFailedError('model', m.error)));
      });
      w.on('error', (e: Error & { code?: string }) => {
        const why = e.code === 'ERR_WORKER_OUT_OF_MEMORY' ? `it ran out of memory (heap limit ${opts.maxHeapMb ?? 'default'} MiB)` : e.message;
        finish(() => reject(new BuildFailedError('worker', `the model build worker failed: ${why}`)));
      });
      w.on('exit', (code) => finish(() => reject(new BuildFailedError('worker', `the model build worker stopped (exit code ${code}) without giving a model`))));
      const msg: BuildRequestMessage = { batches, settings };
      try {
        w.postMessage(msg, [...transfer]);
      } catch (e) {
        finish(() => reject(new BuildFailedError('worker', `the reference data could not be sent to the build worker: ${(e as Error).message}`)));
      }
    });
  }

  /** Stop every running build (server shutdown). */
  async stop(): Promise<void> {
    await Promise.all([...this.workers].map((w) => w.terminate()));
    this.workers.clear();
  }
}

/**
 * Pack a reference batch for the worker: its spectra row by row in one typed array — Float32 when
 * every spectrum is a Float32Array (stored spectra are), else Float64 so no value is rounded — and
 * Float64Array axis, times and property. The worker builds from exactly the values given here.
 */
export function packReferenceBatch(b: { id: string; axis: ArrayLike<number>; times: ArrayLike<number>; spectra: ArrayLike<number>[]; property?: ArrayLike<number> }): PackedReferenceBatch {
  const p = b.axis.length;
  const f32 = b.spectra.every((s) => s instanceof Float32Array);
  const values = f32 ? new Float32Array(b.spectra.length * p) : new Float64Array(b.spectra.length * p);
  for (let i = 0; i < b.spectra.length; i++) {
    const s = b.spectra[i]!;
    if (s.length !== p) throw new RangeError(`reference batch "${b.id}": spectrum ${i} has ${s.length} values, the axis ${p}`);
    values.set(s, i * p);
  }
  return { id: b.id, axis: Float64Array.from(b.axis), times: Float64Array.from(b.times), values, ...(b.property ? { property: Float64Array.from(b.property) } : {}) };
}
