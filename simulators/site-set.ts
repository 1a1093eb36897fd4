/**
 * A site-style data set: fluid-bed dryer batches written the way a site has them, not the way the
 * dryer simulator writes its own files. The process (drying physics, batch-to-batch variation,
 * faults) is the dryer simulator's (dryer.ts, faults.ts); what a site adds is put on top:
 *
 * - Another instrument. The chemistry is rendered on a 1 nm grid wider than the site's range and
 *   then measured by a dispersive instrument of its own: a triangular instrument line shape (the
 *   slit function of a grating spectrometer with equal entrance and exit slits) applied to the
 *   transmitted light, a wavelength-calibration error that grows towards the ends of the range,
 *   stray light (T_obs = (T + s)/(1 + s), which bends strong bands), and a detector whose noise
 *   rises towards its long-wavelength cut-off, plus a per-scan baseline offset and a slow baseline
 *   wiggle. Values are reported with 5 decimals. All magnitudes are invented but of the size such
 *   instruments show (common practice, no published source).
 * - Another axis: 397 points from 1101.37 to 2098.81 nm (the dryer simulator: 256 points,
 *   950–1650 nm), written rounded to 0.01 nm, so the spacing is not exactly even (2.51 or 2.52 nm).
 * - Another clock: a spectrum every 15 s (the simulator: 10 s) with ±0.4 s of scan-time jitter,
 *   written as elapsed seconds (`time_s`, 0.1 s) from the first spectrum; the batch start is only
 *   in the batch record.
 * - Operators who stop late: 5–15 min after the true endpoint (a whole number of scan intervals,
 *   each equally likely), the spectra going on until the stop. A batch that never reaches the
 *   target runs to the dryer's 150-min limit.
 * - Lab moisture on a few spectra only: loss-on-drying (LOD) samples taken by the operators, about
 *   5–9 per batch, more near the end, sample times recorded to the minute, with a stated lab error
 *   (simulators/lab-samples.ts gives the schedule and the error). In the spectra file each result
 *   sits in the moisture column of the spectrum nearest its recorded sample time; every other cell
 *   of that column is empty.
 *
 * Files (writeSiteSet):
 *   reference/<batch>.csv   one file per reference batch: `batch,time_s,moisture [% w/w],<nm>…`
 *   test/<batch>.csv        the same for the test batches (to be streamed, not imported)
 *   batch-record.csv        batch,role,start,stop (ISO 8601 UTC): what the batch record says
 *   lab-results.csv         batch,sample_time,moisture [% w/w],method: every LOD result, as the lab
 *                           reports them (for attaching after a batch)
 *   truth/<batch>.truth.json  ground truth: true moisture per spectrum, true endpoint, stop, fault
 *                           onset, lab samples with the true value at each
 *   site-set.json           manifest: seed, axis, instrument, lab error, batches
 *
 * Deterministic from the seed (no clock; fixed number formatting): the same seed gives the same
 * bytes. The batches and the site are an invented scenario.
 */
import { mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import type { SimulatedBatch, TruthFault } from './batch-types.ts';
import { simulateDryerBatch } from './dryer.ts';
import { FAULT_INFO, FAULT_TYPES, type FaultSpec, type FaultType } from './faults.ts';
import { drawLabSamples, LAB_METHODS, type LabSample } from './lab-samples.ts';
import { deriveSeed, Rng } from './prng.ts';

export const SITE_TRUTH_FORMAT = 'tideline-site-truth';
export const SITE_SET_FORMAT = 'tideline-site-set';
export const SITE_FORMAT_VERSION = 1;

/**
 * The dryer faults a site set carries: every fault type the dryer simulator has except the pixel
 * faults (stuck, dead, spikes, saturation), which `npm run evaluate` and the simulator CLI cover.
 */
const PIXEL_FAULTS: readonly FaultType[] = ['stuck-pixels', 'dead-pixels', 'pixel-spikes', 'saturation'];
export const SITE_FAULTS: FaultType[] = FAULT_TYPES.filter((f) => FAULT_INFO[f].kinds.includes('dryer') && !PIXEL_FAULTS.includes(f));

export const SITE_DEFAULTS = {
  axis: { from: 1101.37, to: 2098.81, points: 397 },
  intervalS: 15,
  timeJitterS: 0.4,
  stopAfterEndpointMin: [5, 15] as [number, number],
  moistureTargetPct: 2,
  unit: 'FBD-2',
  product: 'granulate-K7',
  propertyHeader: 'moisture [% w/w]',
  reference: 16,
  good: 6,
  perFault: 1,
};

/** The site's analyzer: how it differs from the simulator's own (instrument.ts). */
export const SITE_INSTRUMENT = {
  /** Full width at half maximum of the triangular instrument line shape, nm. */
  slitFwhmNm: 10,
  /** Wavelength-calibration error: shift = a + b·x², x = −1…1 across the range, nm. */
  wavelengthError: { a: 0.6, b: 0.4 },
  /** Stray light as a fraction of the reference intensity. */
  strayLight: 0.002,
  /** White detector noise at mid-range, absorbance units (sd). */
  noiseAU: 5e-5,
  /** Factor by which the noise grows at the long-wavelength end (InGaAs cut-off). */
  noiseRiseAtEnd: 6,
  /** Per-scan baseline offset, AU (sd). */
  baselineSdAU: 2e-4,
  /** Per-scan slow baseline wiggle (one cosine of random phase, 0.5–1.5 cycles over the range), AU (sd of its amplitude). */
  wiggleSdAU: 1e-4,
  /** Decimals written. */
  decimals: 5,
  /** Rendering grid of the chemistry, nm. */
  renderStepNm: 1,
};

/** LOD error model: sd = sqrt(abs² + (rel·w)²) % w/w. */
export const SITE_LAB_ERROR = { absPct: LAB_METHODS.dryer.abs, rel: LAB_METHODS.dryer.rel, decimals: LAB_METHODS.dryer.decimals };

/** A lab result of a site batch (simulators/lab-samples.ts). */
export type SiteLabSample = LabSample;

export interface SiteBatch {
  role: 'reference' | 'test';
  /** 'good' or the fault type. */
  group: 'good' | FaultType;
  /**
   * The batch on the site's axis and clock, ready for AnalyzerClient.sendBatch (with
   * timestamps 'original'): spectra are the values written to the file (5 decimals), times the
   * site's scan times; truth.property holds the true moisture per spectrum.
   */
  batch: SimulatedBatch;
  lab: SiteLabSample[];
  /** Minutes from the true endpoint to the operator's stop (null when the endpoint was not reached). */
  stopAfterEndpointMin: number | null;
}

export interface SiteSet {
  seed: number;
  axis: number[];
  intervalS: number;
  reference: SiteBatch[];
  test: SiteBatch[];
}

export interface SiteSetOptions {
  seed: number;
  /** Reference batches (good), default 16. */
  reference?: number;
  /** Good test batches, default 6. */
  good?: number;
  /** Test batches per fault type, default 1. */
  perFault?: number;
  /** Test batches for some fault types instead of perFault, e.g. { 'slow-drying': 2 }. */
  perFaultByType?: Partial<Record<FaultType, number>>;
  /** Fault types of the test set, default every dryer fault. */
  faults?: FaultType[];
  /** Fault parameters by type (simulator defaults otherwise). */
  faultParams?: Partial<Record<FaultType, Record<string, number>>>;
  unit?: string;
  product?: string;
}

const round = (v: number, d: number) => Math.round(v * 10 ** d) / 10 ** d;

/** The site axis: evenly spaced in the instrument, written rounded to 0.01 nm. */
export function siteAxis(from = SITE_DEFAULTS.axis.from, to = SITE_DEFAULTS.axis.to, n = SITE_DEFAULTS.axis.points): number[] {
  const step = (to - from) / (n - 1);
  return Array.from({ length: n }, (_, i) => round(from + i * step, 2));
}

/** The site instrument: line-shape weights on the render grid, stray light, its own noise. */
export class SiteInstrument {
  readonly renderAxis: number[];
  private readonly from: Int32Array;
  private readonly weights: Float64Array[];
  private readonly noiseSd: Float64Array;
  private readonly x: Float64Array;
  private readonly t: Float64Array;

  constructor(readonly axis: number[]) {
    const I = SITE_INSTRUMENT;
    const lo = axis[0]!;
    const hi = axis[axis.length - 1]!;
    const margin = I.slitFwhmNm + I.wavelengthError.a + I.wavelengthError.b + 3;
    const r0 = Math.floor(lo - margin);
    const r1 = Math.ceil(hi + margin);
    this.renderAxis = Array.from({ length: Math.round((r1 - r0) / I.renderStepNm) + 1 }, (_, j) => r0 + j * I.renderStepNm);
    const p = axis.length;
    this.from = new Int32Array(p);
    this.weights = [];
    this.noiseSd = new Float64Array(p);
    this.x = new Float64Array(p);
    this.t = new Float64Array(this.renderAxis.length);
    for (let k = 0; k < p; k++) {
      const x = (2 * (axis[k]! - lo)) / (hi - lo) - 1;
      this.x[k] = x;
      // The instrument reports axis[k] but looks at axis[k] + shift.
      const centre = axis[k]! + I.wavelengthError.a + I.wavelengthError.b * x * x;
      const j0 = Math.ceil((centre - I.slitFwhmNm - r0) / I.renderStepNm);
      const j1 = Math.floor((centre + I.slitFwhmNm - r0) / I.renderStepNm);
      const w = new Float64Array(j1 - j0 + 1);
      let sum = 0;
      for (let j = j0; j <= j1; j++) {
        const d = Math.abs(this.renderAxis[j]! - centre);
        w[j - j0] = Math.max(0, 1 - d / I.slitFwhmNm);
        sum += w[j - j0]!;
      }
      for (let j = 0; j < w.length; j++) w[j]! /= sum;
      this.from[k] = j0;
      this.weights.push(w);
      const end = Math.max(0, (x - 0.6) / 0.4);
      this.noiseSd[k] = I.noiseAU * (1 + (I.noiseRiseAtEnd - 1) * end * end);
    }
  }

  /**
   * Measure one rendered spectrum (absorbance on renderAxis) as the site instrument reports it.
   * noise false: line shape, wavelength error and stray light only (for checks).
   */
  measure(rendered: ArrayLike<number>, rng: Rng, noise = true): Float32Array {
    const I = SITE_INSTRUMENT;
    const t = this.t;
    for (let j = 0; j < rendered.length; j++) t[j] = 10 ** -rendered[j]!;
    const baseline = rng.normal(0, I.baselineSdAU);
    const amp = rng.normal(0, I.wiggleSdAU);
    const cycles = rng.between(0.5, 1.5);
    const phase = rng.between(0, 2 * Math.PI);
    const p = this.axis.length;
    const out = new Float32Array(p);
    const s = I.strayLight;
    const scale = 10 ** I.decimals;
    for (let k = 0; k < p; k++) {
      const w = this.weights[k]!;
      const j0 = this.from[k]!;
      let tk = 0;
      for (let j = 0; j < w.length; j++) tk += w[j]! * t[j0 + j]!;
      const obs = (Math.max(tk, 0) + s) / (1 + s);
      const x = this.x[k]!;
      const a = noise ? -Math.log10(obs) + baseline + amp * Math.cos(Math.PI * cycles * (x + 1) + phase) + this.noiseSd[k]! * rng.gauss() : -Math.log10(obs);
      out[k] = noise ? Math.round(a * scale) / scale : a;
    }
    return out;
  }
}

/** One site batch: simulate the process on the render grid, measure it with the site instrument. */
function siteBatch(
  inst: SiteInstrument,
  seed: number,
  id: string,
  start: number,
  role: SiteBatch['role'],
  group: SiteBatch['group'],
  faults: FaultSpec[] | undefined,
  unit: string,
  product: string,
): SiteBatch {
  const rng = new Rng(seed);
  const stopRng = rng.derive('stop');
  const [lo, hi] = SITE_DEFAULTS.stopAfterEndpointMin;
  // Whole scan intervals from lo to hi minutes, each equally likely.
  const stepsLo = Math.round((lo * 60) / SITE_DEFAULTS.intervalS);
  const stepsHi = Math.round((hi * 60) / SITE_DEFAULTS.intervalS);
  const stopSteps = stepsLo + Math.floor(stopRng.uniform() * (stepsHi - stepsLo + 1));
  const sim = simulateDryerBatch({
    seed: deriveSeed(seed, 'process'),
    id,
    start,
    axis: inst.renderAxis,
    intervalS: SITE_DEFAULTS.intervalS,
    unit,
    product,
    faults,
    stopAfterEndpointS: stopSteps * SITE_DEFAULTS.intervalS,
  });
  const jitter = rng.derive('clock');
  const times = sim.times.map((t, i) => (i === 0 ? t : start + Math.round((t - start) / 100 + jitter.between(-SITE_DEFAULTS.timeJitterS, SITE_DEFAULTS.timeJitterS) * 10) * 100));
  const meas = rng.derive('instrument');
  const spectra = sim.spectra.map((s) => inst.measure(s, meas));
  const remapFault = (f: TruthFault): TruthFault => ({ ...f, onsetT: times[f.onsetIndex]! });
  const batch: SimulatedBatch = {
    ...sim,
    axis: inst.axis.slice(),
    times,
    spectra,
    truth: {
      ...sim.truth,
      endpointT: sim.truth.endpointIndex === null ? null : times[sim.truth.endpointIndex]!,
      faults: sim.truth.faults.map(remapFault),
    },
  };
  const lab = drawLabSamples(batch, rng.derive('lab'));
  const ep = batch.truth.endpointIndex;
  return {
    role,
    group,
    batch,
    lab,
    stopAfterEndpointMin: ep === null ? null : (times[times.length - 1]! - times[ep]!) / 60_000,
  };
}

/** Reference batches start 2025-09-01 06:00 UTC, test batches 2025-11-03 06:00 UTC (invented dates; no clock is read). */
const REFERENCE_EPOCH = Date.UTC(2025, 8, 1, 6, 0, 0);
const TEST_EPOCH = Date.UTC(2025, 10, 3, 6, 0, 0);

/** Simulate a whole site set (pure: no files). */
export function simulateSiteSet(opts: SiteSetOptions): SiteSet {
  const { seed } = opts;
  if (!Number.isInteger(seed) || seed < 0 || seed > 0xffffffff) throw new RangeError(`seed ${seed} must be an integer 0…4294967295`);
  const nRef = opts.reference ?? SITE_DEFAULTS.reference;
  const nGood = opts.good ?? SITE_DEFAULTS.good;
  const perFault = opts.perFault ?? SITE_DEFAULTS.perFault;
  const faultTypes = opts.faults ?? SITE_FAULTS;
  for (const [name, v] of [['reference', nRef], ['good', nGood], ['perFault', perFault]] as const) {
    if (!Number.isInteger(v) || v < 0 || v > 1000) throw new RangeError(`${name} ${v} must be an integer 0…1000`);
  }
  if (nRef < 2) throw new RangeError(`a site set needs at least 2 reference batches, not ${nRef}`);
  for (const f of faultTypes) if (!SITE_FAULTS.includes(f)) throw new RangeError(`fault "${f}" is not a dryer fault; known: ${SITE_FAULTS.join(', ')}`);
  const unit = opts.unit ?? SITE_DEFAULTS.unit;
  const product = opts.product ?? SITE_DEFAULTS.product;
  const inst = new SiteInstrument(siteAxis());
  const root = new Rng(seed);
  const starts = root.derive('starts');
  // Batches follow one another on the dryer: a batch every 8–11 h.
  let tRef = REFERENCE_EPOCH;
  const reference: SiteBatch[] = [];
  for (let i = 0; i < nRef; i++) {
    const id = `FB25-${String(101 + i).padStart(3, '0')}`;
    reference.push(siteBatch(inst, deriveSeed(seed, `reference:${i}`), id, tRef, 'reference', 'good', undefined, unit, product));
    tRef += Math.round(starts.between(8, 11) * 60) * 60_000;
  }
  const plan: { group: SiteBatch['group']; faults?: FaultSpec[]; label: string }[] = [];
  for (let i = 0; i < nGood; i++) plan.push({ group: 'good', label: `good:${i}` });
  const onsets = root.derive('onsets');
  for (const type of faultTypes) {
    const count = opts.perFaultByType?.[type] ?? perFault;
    if (!Number.isInteger(count) || count < 0 || count > 1000) throw new RangeError(`test batches for ${type}: ${count} must be an integer 0…1000`);
    for (let i = 0; i < count; i++) {
      // Onsets 10–30 min into the batch; over-wet granules are charged wet (onset 0).
      const onsetS = type === 'over-wet' ? 0 : Math.round(onsets.between(10, 30) * 60);
      plan.push({ group: type, faults: [{ type, onsetS, ...(opts.faultParams?.[type] ? { params: opts.faultParams[type] } : {}) }], label: `${type}:${i}` });
    }
  }
  // The test batches in a fixed, mixed order, as they would come on the dryer.
  const order = plan.map((p, k) => ({ p, key: deriveSeed(seed, `order:${p.label}:${k}`) })).sort((a, b) => a.key - b.key || a.p.label.localeCompare(b.p.label));
  let tTest = TEST_EPOCH;
  const test: SiteBatch[] = order.map(({ p }, k) => {
    const id = `FB25-${String(501 + k).padStart(3, '0')}`;
    const b = siteBatch(inst, deriveSeed(seed, `test:${p.label}`), id, tTest, 'test', p.group, p.faults, unit, product);
    tTest += Math.round(starts.between(8, 11) * 60) * 60_000;
    return b;
  });
  return { seed, axis: inst.axis.slice(), intervalS: SITE_DEFAULTS.intervalS, reference, test };
}

const iso = (t: number) => new Date(t).toISOString().replace('.000Z', 'Z');

/** The header row of a site spectra file. */
export function siteCsvHeader(axis: readonly number[]): string {
  return ['batch', 'time_s', SITE_DEFAULTS.propertyHeader, ...axis.map((a) => a.toFixed(2))].join(',') + '\n';
}

/** Rows of one site batch: elapsed seconds (0.1 s), the LOD result where there is one, absorbances (5 decimals). */
export function siteCsvRows(sb: SiteBatch): string {
  const b = sb.batch;
  const dropped = new Set(b.truth.dropped);
  const lab = new Map(sb.lab.map((l) => [l.spectrumIndex, l.value]));
  const lines: string[] = [];
  for (let i = 0; i < b.spectra.length; i++) {
    if (dropped.has(i)) continue;
    const s = b.spectra[i]!;
    const parts = new Array<string>(s.length + 3);
    parts[0] = b.id;
    parts[1] = ((b.times[i]! - b.start) / 1000).toFixed(1);
    const v = lab.get(i);
    parts[2] = v === undefined ? '' : v.toFixed(SITE_LAB_ERROR.decimals);
    for (let j = 0; j < s.length; j++) parts[j + 3] = s[j]!.toFixed(SITE_INSTRUMENT.decimals);
    lines.push(parts.join(','));
  }
  return lines.join('\n') + '\n';
}

/** Ground truth of one site batch as JSON text. */
export function siteTruthJson(sb: SiteBatch, intervalS: number): string {
  const b = sb.batch;
  const ep = b.truth.endpointIndex;
  return (
    JSON.stringify(
      {
        format: SITE_TRUTH_FORMAT,
        version: SITE_FORMAT_VERSION,
        id: b.id,
        role: sb.role,
        group: sb.group,
        unit: b.unit,
        product: b.product,
        start: b.start,
        startIso: iso(b.start),
        intervalS,
        times: b.times,
        moisture: { unit: '% w/w', target: b.truth.property.target, direction: b.truth.property.direction, values: b.truth.property.values.map((v) => round(v, 4)) },
        endpoint: ep === null ? null : { index: ep, t: b.times[ep], elapsedS: (b.times[ep]! - b.start) / 1000 },
        stop: { index: b.times.length - 1, t: b.times[b.times.length - 1], elapsedS: (b.times[b.times.length - 1]! - b.start) / 1000, afterEndpointMin: sb.stopAfterEndpointMin },
        faults: b.truth.faults.map((f) => ({ type: f.type, onsetIndex: f.onsetIndex, onsetT: f.onsetT, onsetElapsedS: (f.onsetT - b.start) / 1000, params: f.params, ...(f.indices ? { indices: f.indices } : {}) })),
        faultsNotReached: b.truth.faultsNotReached,
        dropped: b.truth.dropped,
        lab: sb.lab,
        batchVariables: b.truth.batchVariables,
      },
      null,
      2,
    ) + '\n'
  );
}

export interface WrittenSiteSet {
  reference: string[];
  test: string[];
  truth: string[];
  batchRecord: string;
  labResults: string;
  manifest: string;
}

/** Write a site set to `dir` (created if missing; files of the same name are replaced). */
export function writeSiteSet(dir: string, set: SiteSet): WrittenSiteSet {
  for (const sub of ['reference', 'test', 'truth']) mkdirSync(join(dir, sub), { recursive: true });
  const header = siteCsvHeader(set.axis);
  const all = [...set.reference, ...set.test];
  const written: WrittenSiteSet = { reference: [], test: [], truth: [], batchRecord: join(dir, 'batch-record.csv'), labResults: join(dir, 'lab-results.csv'), manifest: join(dir, 'site-set.json') };
  for (const sb of all) {
    const f = join(dir, sb.role, `${sb.batch.id}.csv`);
    writeFileSync(f, header + siteCsvRows(sb));
    written[sb.role].push(f);
    const tf = join(dir, 'truth', `${sb.batch.id}.truth.json`);
    writeFileSync(tf, siteTruthJson(sb, set.intervalS));
    written.truth.push(tf);
  }
  writeFileSync(
    written.batchRecord,
    // Times in the batch record to the second.
    'batch,role,start,stop\n' + all.map((sb) => [sb.batch.id, sb.role, iso(sb.batch.start), iso(Math.round(sb.batch.times[sb.batch.times.length - 1]! / 1000) * 1000)].join(',')).join('\n') + '\n',
  );
  writeFileSync(
    written.labResults,
    `batch,sample_time,${SITE_DEFAULTS.propertyHeader},method\n` +
      all.flatMap((sb) => sb.lab.map((l) => [sb.batch.id, iso(l.sampleT), l.value.toFixed(SITE_LAB_ERROR.decimals), 'LOD'].join(','))).join('\n') +
      '\n',
  );
  writeFileSync(
    written.manifest,
    JSON.stringify(
      {
        format: SITE_SET_FORMAT,
        version: SITE_FORMAT_VERSION,
        seed: set.seed,
        description: 'Invented fluid-bed dryer batches written as a site has them (simulators/site-set.ts); not a real product or plant.',
        axis: { points: set.axis.length, from: set.axis[0], to: set.axis[set.axis.length - 1], roundedTo: 0.01 },
        intervalS: set.intervalS,
        timeJitterS: SITE_DEFAULTS.timeJitterS,
        stopAfterEndpointMin: SITE_DEFAULTS.stopAfterEndpointMin,
        instrument: SITE_INSTRUMENT,
        labError: { ...SITE_LAB_ERROR, model: 'sd = sqrt(absPct^2 + (rel*w)^2) % w/w' },
        moistureTargetPct: SITE_DEFAULTS.moistureTargetPct,
        batches: all.map((sb) => ({
          id: sb.batch.id,
          role: sb.role,
          group: sb.group,
          file: `${sb.role}/${sb.batch.id}.csv`,
          truth: `truth/${sb.batch.id}.truth.json`,
          spectra: sb.batch.spectra.length - sb.batch.truth.dropped.length,
          labValues: sb.lab.length,
          endpointIndex: sb.batch.truth.endpointIndex,
          stopAfterEndpointMin: sb.stopAfterEndpointMin === null ? null : round(sb.stopAfterEndpointMin, 2),
          faults: sb.batch.truth.faults.map((f) => ({ type: f.type, onsetIndex: f.onsetIndex })),
        })),
      },
      null,
      2,
    ) + '\n',
  );
  return written;
}
