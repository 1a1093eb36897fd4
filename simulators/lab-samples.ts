/**
 * Laboratory results for a simulated batch, the way they arrive at a site: a few samples per batch,
 * more near the end, each with its sample time recorded to the minute and a lab error — not the
 * simulator's truth on every spectrum.
 *
 * Dryer — loss on drying (LOD), % w/w: one sample 10–14 min into the batch, then one every
 * 25–30 min until the product temperature has risen 12 °C over its value at 10 min (well into the
 * falling-rate period, when operators start checking), then one every 5–8 min until the stop, and a
 * discharge sample at the stop (about 5–9 per batch). Error: normal, sd √(0.10² + (0.03·w)²) % w/w —
 * 0.10 % w/w for the moisture analyzer's repeatability and 3 % relative for the thief sample not
 * being what the probe sees (common-practice sizes, from memory, no published source).
 *
 * Reactor — conversion by HPLC, %: one sample 25–35 min after charging, then one every 40–50 min
 * until 150 min, then one every 15–25 min until the stop, and one at the stop (about 6–9 per batch
 * of 3–4 h). Error: normal, sd 0.10 % conversion (common practice for an HPLC assay near full
 * conversion, from memory, no published source), capped at 100 %.
 *
 * Each result is matched to the spectrum nearest its recorded time (dropped spectra skipped).
 */
import type { SimulatedBatch } from './batch-types.ts';
import type { Rng } from './prng.ts';

export interface LabSample {
  /** Sample time as recorded (to the minute), ms epoch. */
  sampleT: number;
  /** True sample time, ms epoch. */
  trueSampleT: number;
  /** The lab result (moisture % w/w or conversion %). */
  value: number;
  /** True property at the true sample time. */
  trueValue: number;
  /** Index of the spectrum nearest the recorded sample time. */
  spectrumIndex: number;
  /** 'in-process', or 'discharge' for the sample at the stop. */
  kind: 'in-process' | 'discharge';
}

export interface LabMethod {
  /** Method name as a lab reports it. */
  method: string;
  property: 'moisture' | 'conversion';
  unit: '% w/w' | '%';
  /** Error sd = sqrt(abs² + (rel·value)²). */
  abs: number;
  rel: number;
  decimals: number;
  /** Results are kept within [min, max]. */
  min: number;
  max: number;
}

export const LAB_METHODS: Record<'dryer' | 'reactor', LabMethod> = {
  dryer: { method: 'LOD', property: 'moisture', unit: '% w/w', abs: 0.1, rel: 0.03, decimals: 2, min: 0, max: 100 },
  reactor: { method: 'HPLC', property: 'conversion', unit: '%', abs: 0.1, rel: 0, decimals: 2, min: 0, max: 100 },
};

/** The lab error sd of one result. */
export function labSd(m: LabMethod, trueValue: number): number {
  return Math.hypot(m.abs, m.rel * trueValue);
}

/** Rise of the dryer's product temperature over its value at 10 min at which operators start sampling closely, °C. */
const CLOSE_SAMPLING_RISE_C = 12;
const MINUTE = 60_000;

const round = (v: number, d: number) => Math.round(v * 10 ** d) / 10 ** d;

/** Linear interpolation of y(t) at tq (t increasing); clamps at the ends. */
function interp(t: readonly number[], y: readonly number[], tq: number): number {
  if (tq <= t[0]!) return y[0]!;
  const n = t.length;
  if (tq >= t[n - 1]!) return y[n - 1]!;
  let lo = 0;
  let hi = n - 1;
  while (hi - lo > 1) {
    const mid = (lo + hi) >> 1;
    if (t[mid]! <= tq) lo = mid;
    else hi = mid;
  }
  const f = (tq - t[lo]!) / (t[hi]! - t[lo]!);
  return y[lo]! + f * (y[hi]! - y[lo]!);
}

function nearestIndex(times: readonly number[], tq: number, skip: ReadonlySet<number>): number {
  let best = -1;
  let bestD = Infinity;
  for (let i = 0; i < times.length; i++) {
    if (skip.has(i)) continue;
    const d = Math.abs(times[i]! - tq);
    if (d < bestD) {
      bestD = d;
      best = i;
    }
  }
  return best;
}

/** When close sampling starts, ms epoch (Infinity: never). */
function closeSamplingFrom(b: SimulatedBatch): number {
  const startT = b.start;
  if (b.kind === 'reactor') return startT + 150 * MINUTE;
  const temp = b.truth.state.find((s) => s.name === 'product temperature')!.values;
  const tempAt10 = interp(b.times, temp, startT + 10 * MINUTE);
  for (let i = 0; i < b.times.length; i++) if (b.times[i]! - startT > 10 * MINUTE && temp[i]! >= tempAt10 + CLOSE_SAMPLING_RISE_C) return b.times[i]!;
  return Infinity;
}

/** The operators' lab samples for one batch (schedule and error in the header comment). */
export function drawLabSamples(b: SimulatedBatch, rng: Rng): LabSample[] {
  const m = LAB_METHODS[b.kind];
  const dryer = b.kind === 'dryer';
  const times = b.times;
  const endT = times[times.length - 1]!;
  const truth = b.truth.property.values;
  const dropped = new Set(b.truth.dropped);
  const closeFrom = closeSamplingFrom(b);
  const planned: { t: number; kind: LabSample['kind'] }[] = [];
  let t = b.start + (dryer ? rng.between(10, 14) : rng.between(25, 35)) * MINUTE;
  while (t < endT - 2 * MINUTE) {
    planned.push({ t, kind: 'in-process' });
    const step = t >= closeFrom ? (dryer ? rng.between(5, 8) : rng.between(15, 25)) : dryer ? rng.between(25, 30) : rng.between(40, 50);
    let next = t + step * MINUTE;
    // The first close check comes soon after the cue.
    if (t < closeFrom && next > closeFrom) next = Math.max(t + 3 * MINUTE, closeFrom + rng.between(0, 2) * MINUTE);
    t = next;
  }
  planned.push({ t: endT - rng.between(0, 0.5) * MINUTE, kind: 'discharge' });
  const out: LabSample[] = [];
  const used = new Set<number>();
  for (const s of planned) {
    const recorded = Math.round(s.t / MINUTE) * MINUTE;
    const idx = nearestIndex(times, recorded, dropped);
    const trueValue = interp(times, truth, s.t);
    const value = Math.min(m.max, Math.max(m.min, round(trueValue + labSd(m, trueValue) * rng.gauss(), m.decimals)));
    if (used.has(idx)) continue; // two samples on one spectrum: the schedule keeps them ≥ 3 min apart, so only at the very end
    used.add(idx);
    out.push({ sampleT: recorded, trueSampleT: Math.round(s.t), value, trueValue: round(trueValue, 4), spectrumIndex: idx, kind: s.kind });
  }
  return out;
}
