/**
 * Load mode: many simulated analyzers streaming at once, each with its own token, boot epoch,
 * unit and seed. Batches are generated one at a time per analyzer, just before they are streamed.
 */
import { readFileSync } from 'node:fs';
import { DRYER_AXIS, REACTOR_AXIS } from './bands.ts';
import { simulateBatch } from './batch.ts';
import type { FaultSpec, ProcessKind } from './faults.ts';
import { deriveSeed } from './prng.ts';
import { AnalyzerClient, type ClientStats, type StatusWindow } from './stream-client.ts';

export interface AnalyzerIdentity {
  analyzer: string;
  token: string;
  /** Unit named in batch-start; defaults to the process's default unit with the analyzer number. */
  unit?: string;
}

/**
 * Read a tokens file: one analyzer per line, `ANALYZER TOKEN [UNIT]` separated by spaces, tabs or
 * commas; blank lines and lines starting with # are skipped.
 */
export function parseTokensFile(text: string, source = 'tokens file'): AnalyzerIdentity[] {
  const out: AnalyzerIdentity[] = [];
  text.split(/\r?\n/).forEach((raw, i) => {
    const line = raw.trim();
    if (!line || line.startsWith('#')) return;
    const parts = line.split(/[\s,]+/);
    if (parts.length < 2 || parts.length > 3) throw new Error(`${source} line ${i + 1}: expected "ANALYZER TOKEN [UNIT]", got ${parts.length} fields`);
    out.push({ analyzer: parts[0]!, token: parts[1]!, ...(parts[2] ? { unit: parts[2] } : {}) });
  });
  if (out.length === 0) throw new Error(`${source} names no analyzers`);
  return out;
}

export function readTokensFile(path: string): AnalyzerIdentity[] {
  return parseTokensFile(readFileSync(path, 'utf8'), path);
}

export interface StreamRunOptions {
  url: string;
  kind: ProcessKind;
  identities: AnalyzerIdentity[];
  /** Batches per analyzer; 0 = until stopped. */
  batches: number;
  seed: number;
  speed: number;
  binary: boolean;
  window?: number;
  product?: string;
  faults?: FaultSpec[];
  /** Analyzer status windows (NAMUR NE 107) sent during every batch, e.g. function check while the probe is cleaned. */
  statusWindows?: StatusWindow[];
  axis?: number[];
  intervalS?: number;
  boot?: number;
  /** Prefix of batch ids (default `<analyzer>-<boot in base 36>`); ids end in -b001, -b002, … */
  batchPrefix?: string;
  log?: (line: string) => void;
  /** Called after each batch is fully acked. */
  onBatch?: (analyzer: string, batchId: string, spectra: number, stopped: boolean) => void;
  /** When aborted (e.g. on SIGINT) every analyzer ends its open batch at once, waits for the acks and stops. */
  signal?: AbortSignal;
}

export interface StreamRunResult {
  analyzers: number;
  batches: number;
  spectra: number;
  wallMs: number;
  perAnalyzer: { analyzer: string; stats: ClientStats }[];
}

/** Stream batches from one or many analyzers at once; resolves when all are done and acked. */
export async function runStreams(o: StreamRunOptions): Promise<StreamRunResult> {
  const t0 = Date.now();
  let batches = 0;
  let spectra = 0;
  let stopped = false;
  const clients = o.identities.map(
    (id, k) =>
      new AnalyzerClient({
        url: o.url,
        token: id.token,
        analyzer: id.analyzer,
        axis: o.axis ?? (o.kind === 'dryer' ? DRYER_AXIS : REACTOR_AXIS),
        binary: o.binary,
        window: o.window,
        boot: o.boot !== undefined ? o.boot + k : undefined,
        instrument: `Tideline simulator (${o.kind})`,
        log: o.log ? (line) => o.log!(`[${id.analyzer}] ${line}`) : undefined,
      }),
  );
  o.signal?.addEventListener('abort', () => (stopped = true), { once: true });
  if (o.signal?.aborted) stopped = true;
  const runOne = async (client: AnalyzerClient, id: AnalyzerIdentity, k: number) => {
    await client.start();
    for (let b = 0; (o.batches === 0 || b < o.batches) && !stopped; b++) {
      const seed = deriveSeed(o.seed, `analyzer:${k}:batch:${b}`);
      const batch = simulateBatch(o.kind, {
        seed,
        // Batch ids must be unique on the server: analyzer, boot epoch (base 36) and number.
        id: `${o.batchPrefix ?? `${id.analyzer}-${client.boot.toString(36)}`}-b${String(b + 1).padStart(3, '0')}`,
        faults: o.faults,
        axis: o.axis,
        intervalS: o.intervalS,
        product: o.product,
      });
      const r = await client.sendBatch(batch, { speed: o.speed, unit: id.unit ?? batch.unit, signal: o.signal, ...(o.statusWindows ? { statusWindows: o.statusWindows } : {}) });
      batches++;
      spectra += r.spectra;
      o.onBatch?.(id.analyzer, batch.id, r.spectra, r.stopped);
    }
  };
  try {
    const results = await Promise.allSettled(clients.map((c, k) => runOne(c, o.identities[k]!, k)));
    const failed = results.find((r): r is PromiseRejectedResult => r.status === 'rejected');
    if (failed) throw failed.reason;
  } finally {
    await Promise.all(clients.map((c) => c.close()));
  }
  return {
    analyzers: clients.length,
    batches,
    spectra,
    wallMs: Date.now() - t0,
    perAnalyzer: clients.map((c, k) => ({ analyzer: o.identities[k]!.analyzer, stats: c.stats() })),
  };
}
