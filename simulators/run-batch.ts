/** The scan loop shared by the dryer and reactor: process state → instrument → ground truth. */
import type { SimulateOptions, SimulatedBatch, StateTrace, TruthFault } from './batch-types.ts';
import { SIM_EPOCH_MS } from './batch-types.ts';
import type { FaultSpec, ProcessKind, ResolvedFault } from './faults.ts';
import { resolveFaults } from './faults.ts';
import { Instrument, type InstrumentSettings, type ScanConditions } from './instrument.ts';
import { Rng } from './prng.ts';

export interface ProcessStep {
  property: number;
  conditions: ScanConditions;
  /** Values for the state traces, in the order of ProcessModel.traces. */
  trace: number[];
}

export interface ProcessModel {
  kind: ProcessKind;
  propertyName: 'moisture' | 'conversion';
  propertyUnit: '% w/w' | '%';
  target: number;
  direction: 'below' | 'above';
  batchVariables: Record<string, number>;
  traces: { name: string; unit: string }[];
  /** Spectra after the endpoint before the operator stops the batch. */
  overrunSteps: number;
  maxSteps: number;
  /** State at scan i (called once per scan, i = 0, 1, 2, …, with tS = i·dtS). */
  step(i: number, tS: number, dtS: number): ProcessStep;
  /** Faults the process itself handles (rate changes). */
  processFaults: ResolvedFault[];
}

export function validateAxis(axis: readonly number[]): void {
  if (axis.length < 2) throw new RangeError(`axis needs at least 2 wavelengths, got ${axis.length}`);
  for (let i = 0; i < axis.length; i++) {
    if (!Number.isFinite(axis[i]!)) throw new RangeError(`axis[${i}] = ${axis[i]} is not a finite wavelength`);
    if (i > 0 && !(axis[i]! > axis[i - 1]!)) throw new RangeError(`axis must increase strictly; axis[${i}] = ${axis[i]} follows ${axis[i - 1]}`);
  }
}

export function runBatch(
  opts: SimulateOptions,
  defaults: { axis: number[]; intervalS: number; unit: string; product: string; kind: ProcessKind },
  makeModel: (rng: Rng, faults: ResolvedFault[]) => ProcessModel,
  instrument: (rng: Rng) => Omit<InstrumentSettings, 'axis' | 'ideal'>,
): SimulatedBatch {
  if (!Number.isInteger(opts.seed) || opts.seed < 0 || opts.seed > 0xffffffff) {
    throw new RangeError(`seed ${opts.seed} must be an integer 0…4294967295`);
  }
  const axis = opts.axis ?? defaults.axis;
  validateAxis(axis);
  const intervalS = opts.intervalS ?? defaults.intervalS;
  if (!(intervalS > 0) || !Number.isFinite(intervalS)) throw new RangeError(`interval ${intervalS} s must be a positive number`);
  if (opts.stopAfterEndpointS !== undefined && !(opts.stopAfterEndpointS >= 0 && Number.isFinite(opts.stopAfterEndpointS))) {
    throw new RangeError(`stop after endpoint ${opts.stopAfterEndpointS} s must be a finite number ≥ 0`);
  }
  const faults = resolveFaults(defaults.kind, opts.faults);
  const root = new Rng(opts.seed);
  // Fixed order of derived streams: batch variables, instrument variables, then per-scan streams.
  const model = makeModel(root.derive('batch'), faults);
  const inst = new Instrument({ axis, ideal: opts.ideal ?? false, ...instrument(root.derive('instrument-variables')) }, faults, root.derive('scan'));
  const start = opts.start ?? SIM_EPOCH_MS;

  const times: number[] = [];
  const spectra: Float32Array[] = [];
  const property: number[] = [];
  const traces: StateTrace[] = model.traces.map((t) => ({ ...t, values: [] }));
  let endpointIndex: number | null = null;
  let lastIndex = model.maxSteps - 1;
  const overrunSteps = opts.stopAfterEndpointS === undefined ? model.overrunSteps : Math.round(opts.stopAfterEndpointS / intervalS);
  for (let i = 0; i <= lastIndex; i++) {
    const tS = i * intervalS;
    const s = model.step(i, tS, intervalS);
    times.push(start + Math.round(tS * 1000));
    property.push(s.property);
    s.trace.forEach((v, k) => traces[k]!.values.push(v));
    spectra.push(inst.render(i, tS, intervalS, s.conditions));
    const holds = model.direction === 'below' ? s.property <= model.target : s.property >= model.target;
    if (endpointIndex === null && holds) {
      endpointIndex = i;
      lastIndex = Math.min(lastIndex, i + overrunSteps);
    }
  }
  const n = spectra.length;
  const endS = (n - 1) * intervalS;

  const truthFaults: TruthFault[] = [];
  const notReached: FaultSpec[] = [];
  const dropped = new Set<number>();
  const processTypes = new Set(model.processFaults.map((f) => f.ordinal));
  for (const f of faults) {
    // Process faults change the rate at onsetS: the first state that differs is the next scan.
    const first = processTypes.has(f.ordinal)
      ? Math.floor(f.onsetS / intervalS + 1e-9) + 1
      : f.type === 'over-wet'
        ? 0
        : Math.ceil(f.onsetS / intervalS - 1e-9);
    if (first > n - 1 || (f.onsetS > endS && f.type !== 'over-wet')) {
      notReached.push({ type: f.type, onsetS: f.onsetS, params: f.params });
      continue;
    }
    const entry: TruthFault = { type: f.type, onsetIndex: first, onsetT: times[first]!, onsetS: f.onsetS, params: { ...f.params } };
    const events = inst.events.get(f.ordinal);
    if (events) entry.indices = events.filter((i) => i < n);
    const px = inst.pixelEvents.get(f.ordinal);
    if (px) entry.pixels = px.filter((e) => e.index < n);
    if (f.type === 'dropout') {
      for (let i = first; i < n && (i - first) * intervalS < f.params.durationS!; i++) dropped.add(i);
    }
    truthFaults.push(entry);
  }

  return {
    id: opts.id ?? `${defaults.kind}-s${opts.seed}`,
    kind: defaults.kind,
    unit: opts.unit ?? defaults.unit,
    product: opts.product ?? defaults.product,
    seed: opts.seed,
    axis: axis.slice(),
    start,
    times,
    spectra,
    truth: {
      property: { name: model.propertyName, unit: model.propertyUnit, values: property, target: model.target, direction: model.direction },
      endpointIndex,
      endpointT: endpointIndex === null ? null : times[endpointIndex]!,
      faults: truthFaults,
      faultsNotReached: notReached,
      dropped: [...dropped].sort((a, b) => a - b),
      batchVariables: model.batchVariables,
      state: traces,
    },
  };
}
