/**
 * The simulated NIR analyzer: turns the chemical state at the probe into one measured absorbance
 * spectrum, the way a diode-array instrument would.
 *
 * 1. Beer–Lambert mixing of pure-component absorptivities (bands.ts), evaluated on the axis plus a
 *    small per-scan wavelength jitter, at the process temperature (water-band shift).
 * 2. Scatter as additive (offset + tilt) and multiplicative terms — the form MSC assumes,
 *    x = a + b·x_ref (Geladi, MacDougall & Martens 1985, Appl. Spectrosc. 39:491) — whose size
 *    the process sets from particle size.
 * 3. Light: sample signal S = L(λ, t)·10^(−A) against a white reference W = L(λ, 0) taken at batch
 *    start; L drifts slowly (lamp drift and colour change).
 * 4. Detector noise on S: signal-dependent (shot) plus read noise, σ_S² = s²·S + r² in units of
 *    the full-scale reference signal (common practice for photodiode arrays; values invented).
 * 5. Reported absorbance −log10(S / W).
 * Faults from faults.ts act from their onset and not before.
 */
import { addComponent, impurityComponent, mixtureAbsorbance, shiftedComponent, type PureComponent } from './bands.ts';
import type { ResolvedFault } from './faults.ts';
import type { Rng } from './prng.ts';

export interface InstrumentSettings {
  axis: readonly number[];
  /** No jitter, scatter, drift or noise: the pure Beer–Lambert absorbance (for checks). */
  ideal: boolean;
  /** Shot-noise coefficient s (σ_S² = s²·S + r²), full-scale units. */
  shotNoise: number;
  /** Read noise r, full-scale units. */
  readNoise: number;
  /** Standard deviation of the per-scan wavelength jitter, nm. */
  jitterSdNm: number;
  /** Slow lamp drift, fractional intensity change per hour (per batch). */
  lampDriftPerH: number;
  /** Slow lamp colour change per hour: relative tilt between the ends of the axis. */
  lampTiltPerH: number;
}

export interface ScanConditions {
  components: readonly PureComponent[];
  concentrations: Float64Array;
  pathLength: number;
  temperatureC: number;
  /** Index of the raw-material lot component (target of 'wrong-material'). */
  lotComponent: number;
  scatterOffset: number;
  scatterTilt: number;
  scatterMult: number;
}

interface FaultState {
  fault: ResolvedFault;
  rng: Rng;
  started: boolean;
  layer?: Float64Array;
  /** Pixel faults: the affected pixels (fixed for stuck/dead/saturation) and the stuck values. */
  pixels?: number[];
  frozen?: Float32Array;
}

const SPECTRAL_FAULTS = new Set(['wrong-material', 'probe-fouling', 'spikes', 'lamp-ageing', 'bad-scans', 'stuck-pixels', 'dead-pixels', 'pixel-spikes', 'saturation']);
const PIXEL_FAULTS = new Set(['stuck-pixels', 'dead-pixels', 'pixel-spikes', 'saturation']);

export class Instrument {
  private readonly axis: Float64Array;
  private readonly x: Float64Array; // position on the axis, −1 … 1
  private readonly profile: Float64Array; // lamp × detector throughput, max 1
  private readonly chem: Float64Array;
  private readonly faults: FaultState[];
  private readonly jitterRng: Rng;
  private readonly detectorRng: Rng;
  private swapped: { list: PureComponent[]; impurity: PureComponent } | null = null;
  /** Scan indices where a spike or bad scan happened, by fault ordinal. */
  readonly events = new Map<number, number[]>();
  /** Pixel faults: per damaged scan, the damaged pixels, by fault ordinal. */
  readonly pixelEvents = new Map<number, { index: number; pixels: number[] }[]>();

  constructor(
    private readonly settings: InstrumentSettings,
    faults: readonly ResolvedFault[],
    rng: Rng,
  ) {
    const p = settings.axis.length;
    this.axis = Float64Array.from(settings.axis);
    const lo = this.axis[0]!;
    const hi = this.axis[p - 1]!;
    const mid = (lo + hi) / 2;
    const half = (hi - lo) / 2;
    this.x = this.axis.map((l) => (l - mid) / half);
    // Throughput falls off towards the ends of the detector's range (illustrative shape).
    this.profile = this.x.map((x) => Math.exp(-0.5 * (x / 1.1) ** 2));
    this.chem = new Float64Array(p);
    this.jitterRng = rng.derive('jitter');
    this.detectorRng = rng.derive('detector');
    this.faults = faults
      .filter((f) => SPECTRAL_FAULTS.has(f.type))
      .map((f) => ({ fault: f, rng: rng.derive(`fault:${f.ordinal}:${f.type}`), started: false }));
  }

  /**
   * Render the scan at process time tS (seconds since batch start); dtS is the scan interval
   * (a fault is already at work during the interval that ends at its first scan).
   */
  render(index: number, tS: number, dtS: number, c: ScanConditions): Float32Array {
    const { ideal } = this.settings;
    const p = this.axis.length;
    const chem = this.chem;
    const jitter = this.jitterRng.gauss() * this.settings.jitterSdNm; // drawn every scan
    let components = c.components;
    let impurityLevel = 0;
    let offset = ideal ? 0 : c.scatterOffset;
    let tilt = ideal ? 0 : c.scatterTilt;
    let mult = ideal ? 1 : c.scatterMult;
    let fouling: { state: FaultState; elapsedMin: number } | null = null;
    let lampLoss = 0;
    let lampTiltAge = 0;
    let badScan: FaultState | null = null;
    const pixelFaults: FaultState[] = [];

    for (const st of this.faults) {
      const f = st.fault;
      if (tS < f.onsetS) continue;
      const first = !st.started;
      st.started = true;
      const elapsedMin = (tS - f.onsetS + dtS) / 60;
      switch (f.type) {
        case 'wrong-material': {
          if (!this.swapped) {
            const list = c.components.slice();
            list[c.lotComponent] = shiftedComponent(c.components[c.lotComponent]!, f.params.shiftNm!);
            this.swapped = { list, impurity: impurityComponent(f.params.bandNm!) };
          }
          components = this.swapped.list;
          impurityLevel += f.params.level!;
          break;
        }
        case 'probe-fouling':
          fouling = { state: st, elapsedMin };
          break;
        case 'spikes': {
          const u = st.rng.uniform();
          const size = st.rng.uniform();
          if (first || u < f.params.probability!) {
            offset += f.params.magnitude! * (0.5 + size);
            mult *= 1 + 0.5 * f.params.magnitude! * size;
            this.noteEvent(f.ordinal, index);
          }
          break;
        }
        case 'lamp-ageing':
          lampLoss += f.params.lossPerHour! * (elapsedMin / 60);
          lampTiltAge += f.params.tiltPerHour! * (elapsedMin / 60);
          break;
        case 'bad-scans': {
          const u = st.rng.uniform();
          if (first || u < f.params.probability!) {
            badScan = st;
            this.noteEvent(f.ordinal, index);
          }
          break;
        }
        default:
          if (PIXEL_FAULTS.has(f.type)) pixelFaults.push(st);
      }
    }

    // 1. Beer–Lambert mixing (with wavelength jitter and the temperature shift of water bands).
    mixtureAbsorbance(this.axis, components, c.concentrations, c.pathLength, chem, ideal ? 0 : jitter, c.temperatureC);
    if (impurityLevel > 0) addComponent(chem, this.axis, this.swapped!.impurity, impurityLevel, ideal ? 0 : jitter);

    // 2. Scatter: multiplicative and additive (offset + tilt).
    for (let i = 0; i < p; i++) chem[i] = mult * chem[i]! + offset + tilt * this.x[i]!;

    // Probe fouling: part of the light sees a stuck layer frozen at onset, plus a film offset.
    if (fouling) {
      const st = fouling.state;
      if (!st.layer) st.layer = Float64Array.from(chem);
      const f = st.fault.params;
      const frac = f.maxFraction! * (1 - Math.exp(-fouling.elapsedMin / f.tauMin!));
      const film = f.offsetPerMin! * fouling.elapsedMin;
      for (let i = 0; i < p; i++) {
        const r = (1 - frac) * 10 ** -chem[i]! + frac * 10 ** -st.layer[i]!;
        chem[i] = -Math.log10(r) + film * (1 - 0.2 * this.x[i]!);
      }
    }

    const out = new Float32Array(p);
    const tH = tS / 3600;
    const drift = ideal ? 1 : 1 + this.settings.lampDriftPerH * tH;
    const colour = ideal ? 0 : this.settings.lampTiltPerH * tH;
    const ageing = Math.exp(-lampLoss);
    let badFrom = -1;
    let badTo = -1;
    if (badScan) {
      const len = 8 + Math.floor(badScan.rng.uniform() * 32);
      badFrom = Math.floor(badScan.rng.uniform() * Math.max(1, p - len));
      badTo = badFrom + len;
    }
    const { shotNoise, readNoise } = this.settings;
    for (let i = 0; i < p; i++) {
      const w = this.profile[i]!;
      const tiltFactor = Math.max(0.05, 1 + colour * this.x[i]! + 0.5 * lampTiltAge * (this.x[i]! - 1));
      const lamp = w * drift * ageing * tiltFactor;
      let s = lamp * 10 ** -chem[i]!;
      const g = this.detectorRng.gauss(); // drawn every pixel of every scan
      if (!ideal) s += g * Math.sqrt(shotNoise * shotNoise * Math.max(s, 0) + readNoise * readNoise);
      if (i >= badFrom && i < badTo) s = readNoise * Math.abs(badScan!.rng.gauss()) + 1e-6;
      // With the ideal instrument and no lamp fault this is exactly chem[i] up to rounding.
      out[i] = ideal && lamp === w ? chem[i]! : -Math.log10(Math.max(s, 1e-7) / w);
    }
    for (const st of pixelFaults) this.pixelFault(st, index, out);
    return out;
  }

  /** Distinct random pixels 1…p−2 (not at the ends of the axis). */
  private pickPixels(st: FaultState, count: number): number[] {
    const p = this.axis.length;
    const set = new Set<number>();
    while (set.size < Math.min(count, p - 2)) set.add(1 + Math.floor(st.rng.uniform() * (p - 2)));
    return [...set].sort((a, b) => a - b);
  }

  private pixelFault(st: FaultState, index: number, out: Float32Array): void {
    const f = st.fault;
    const p = this.axis.length;
    let hit: number[] = [];
    switch (f.type) {
      case 'stuck-pixels': {
        if (!st.pixels) {
          st.pixels = this.pickPixels(st, f.params.count!);
          // a stuck element holds a fixed reading near its value at onset (0.01–0.02 absorbance off)
          st.frozen = Float32Array.from(st.pixels, (j) => out[j]! + (st.rng.uniform() < 0.5 ? -1 : 1) * (0.01 + 0.01 * st.rng.uniform()));
        }
        st.pixels.forEach((j, k) => { out[j] = st.frozen![k]!; });
        hit = st.pixels;
        break;
      }
      case 'dead-pixels': {
        if (!st.pixels) st.pixels = this.pickPixels(st, f.params.count!);
        for (const j of st.pixels) out[j] = 0;
        hit = st.pixels;
        break;
      }
      case 'pixel-spikes': {
        const u = st.rng.uniform();
        if (st.frozen === undefined || u < f.params.probability!) {
          st.frozen = new Float32Array(0); // marks the first scan as done
          hit = this.pickPixels(st, f.params.count!);
          for (const j of hit) out[j] = out[j]! + f.params.magnitude! * (0.5 + st.rng.uniform());
          this.noteEvent(f.ordinal, index);
        }
        break;
      }
      case 'saturation': {
        const n = Math.min(f.params.count!, p);
        const from = Math.max(0, Math.floor(p / 2 - n / 2));
        let low = Infinity;
        for (let j = 0; j < p; j++) if (out[j]! < low) low = out[j]!;
        hit = [];
        for (let j = from; j < from + n; j++) {
          out[j] = low;
          hit.push(j);
        }
        break;
      }
    }
    if (hit.length) {
      let list = this.pixelEvents.get(f.ordinal);
      if (!list) this.pixelEvents.set(f.ordinal, (list = []));
      list.push({ index, pixels: hit.slice() });
    }
  }

  private noteEvent(ordinal: number, index: number): void {
    let list = this.events.get(ordinal);
    if (!list) this.events.set(ordinal, (list = []));
    list.push(index);
  }
}
