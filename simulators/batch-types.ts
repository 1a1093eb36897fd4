/** Shapes shared by the dryer and reactor simulators (re-exported from batch.ts). */
import type { FaultSpec, FaultType } from './faults.ts';

export interface TruthFault {
  type: FaultType;
  /** First spectrum the fault changes (or the first one missing, for a drop-out). */
  onsetIndex: number;
  onsetT: number;
  /** Requested onset, s after batch start. */
  onsetS: number;
  params: Record<string, number>;
  /** Scans hit by a random-event fault (spikes, bad scans, pixel spikes). */
  indices?: number[];
  /** Pixel faults (stuck, dead, spikes, saturation): the damaged pixels of each damaged scan. */
  pixels?: { index: number; pixels: number[] }[];
}

export interface StateTrace {
  name: string;
  unit: string;
  values: number[];
}

export interface SimulatedBatch {
  id: string;
  kind: 'dryer' | 'reactor';
  unit: string;
  product: string;
  seed: number;
  /** nm */
  axis: number[];
  /** ms epoch (a fixed, invented date; no clock) */
  start: number;
  /** ms epoch per spectrum */
  times: number[];
  /** absorbance */
  spectra: Float32Array[];
  truth: {
    property: { name: 'moisture' | 'conversion'; unit: '% w/w' | '%'; values: number[]; target: number; direction: 'below' | 'above' };
    /** First index where the true endpoint holds (moisture ≤ target, conversion ≥ target). */
    endpointIndex: number | null;
    endpointT: number | null;
    faults: TruthFault[];
    /** Faults asked for whose onset came after the batch ended. */
    faultsNotReached: FaultSpec[];
    /** Indices not transmitted (drop-out). */
    dropped: number[];
    /** Batch-level variables drawn for this batch (initial state, rates, lot, …). */
    batchVariables: Record<string, number>;
    /** Process state per spectrum: temperature, particle size, concentrations. */
    state: StateTrace[];
  };
}

export interface SimulateOptions {
  seed: number;
  id?: string;
  faults?: FaultSpec[];
  /** Wavelength axis, nm, strictly increasing. */
  axis?: number[];
  /** Seconds between spectra. */
  intervalS?: number;
  unit?: string;
  product?: string;
  /** Batch start, ms epoch. Defaults to a fixed invented date. */
  start?: number;
  /** Pure Beer–Lambert absorbance without scatter, jitter, drift or noise (for checks). */
  ideal?: boolean;
  /**
   * When the operator stops the batch: seconds after the true endpoint (rounded to whole scan
   * intervals). Default: the process model's own overrun (dryer 4–10 min, reactor per reactor.ts).
   */
  stopAfterEndpointS?: number;
}

/** 2026-03-02 06:00 UTC: an invented, fixed start for simulated batches (no clock is read). */
export const SIM_EPOCH_MS = Date.UTC(2026, 2, 2, 6, 0, 0);
