/** Simulated batches: the public entry points of the simulators. */
import type { SimulateOptions, SimulatedBatch } from './batch-types.ts';
import { SIM_EPOCH_MS } from './batch-types.ts';
import { simulateDryerBatch } from './dryer.ts';
import type { FaultSpec, ProcessKind } from './faults.ts';
import { deriveSeed } from './prng.ts';
import { simulateReactorBatch } from './reactor.ts';

export type { SimulateOptions, SimulatedBatch, TruthFault, StateTrace } from './batch-types.ts';
export { SIM_EPOCH_MS } from './batch-types.ts';
export type { FaultSpec, FaultType, ProcessKind } from './faults.ts';
export { FAULT_TYPES, FAULT_INFO, parseFaultArg } from './faults.ts';
export { simulateDryerBatch } from './dryer.ts';
export { simulateReactorBatch } from './reactor.ts';

export function simulateBatch(kind: ProcessKind, opts: SimulateOptions): SimulatedBatch {
  if (kind === 'dryer') return simulateDryerBatch(opts);
  if (kind === 'reactor') return simulateReactorBatch(opts);
  throw new Error(`unknown process kind "${kind as string}"; use dryer or reactor`);
}

export interface ReferenceSetOptions {
  /** Faults for some batches: batch index → faults. */
  faults?: Record<number, FaultSpec[]>;
  axis?: number[];
  intervalS?: number;
  unit?: string;
  product?: string;
  /** Hours between batch starts (default 6). */
  spacingH?: number;
}

/**
 * n batches of one process, each with its own seed derived from `seed`, starting `spacingH` hours
 * apart from the fixed simulation epoch. Ids: `<kind>-s<seed>-b<01…>`.
 */
export function simulateReferenceSet(kind: ProcessKind, n: number, seed: number, opts: ReferenceSetOptions = {}): SimulatedBatch[] {
  if (!Number.isInteger(n) || n < 1 || n > 10_000) throw new RangeError(`number of batches ${n} must be an integer 1…10000`);
  if (!Number.isInteger(seed) || seed < 0 || seed > 0xffffffff) throw new RangeError(`seed ${seed} must be an integer 0…4294967295`);
  const spacingMs = (opts.spacingH ?? 6) * 3600_000;
  const width = Math.max(2, String(n).length);
  const out: SimulatedBatch[] = [];
  for (let i = 0; i < n; i++) {
    out.push(
      simulateBatch(kind, {
        seed: deriveSeed(seed, `batch:${i}`),
        id: `${kind}-s${seed}-b${String(i + 1).padStart(width, '0')}`,
        start: SIM_EPOCH_MS + i * spacingMs,
        faults: opts.faults?.[i],
        axis: opts.axis,
        intervalS: opts.intervalS,
        unit: opts.unit,
        product: opts.product,
      }),
    );
  }
  return out;
}
