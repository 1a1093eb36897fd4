/**
 * Fault types the simulators can inject, their parameters and defaults.
 * Each fault acts from its onset and not before; several may be combined.
 * Names and behaviour are our own invented scenario.
 */

export type ProcessKind = 'dryer' | 'reactor';

export const FAULT_TYPES = [
  'wrong-material',
  'probe-fouling',
  'stalled-reaction',
  'slow-drying',
  'over-wet',
  'spikes',
  'dropout',
  'lamp-ageing',
  'bad-scans',
  'stuck-pixels',
  'dead-pixels',
  'pixel-spikes',
  'saturation',
] as const;
export type FaultType = (typeof FAULT_TYPES)[number];

export interface FaultSpec {
  type: FaultType;
  /** Process time of onset, seconds after batch start. */
  onsetS: number;
  params?: Record<string, number>;
}

interface ParamInfo {
  default: number;
  min: number;
  max: number;
  description: string;
}

export interface FaultInfo {
  kinds: ProcessKind[];
  description: string;
  params: Record<string, ParamInfo>;
}

export const FAULT_INFO: Record<FaultType, FaultInfo> = {
  'wrong-material': {
    kinds: ['dryer', 'reactor'],
    description:
      'off-spec raw material at the probe from onset: the lot component (dryer: active; reactor: B) has its bands shifted and an extra impurity band appears',
    params: {
      shiftNm: { default: 6, min: -40, max: 40, description: 'shift of the lot component bands, nm' },
      bandNm: { default: 1410, min: 900, max: 2500, description: 'position of the impurity band, nm' },
      level: { default: 0.04, min: 0, max: 2, description: 'impurity band height, absorbance' },
    },
  },
  'probe-fouling': {
    kinds: ['dryer', 'reactor'],
    description:
      'material builds up on the probe window from onset: a growing fraction of the light sees the stuck layer (attenuating the process signal) and a growing film offset',
    params: {
      tauMin: { default: 15, min: 0.1, max: 1e4, description: 'time constant of the build-up, min' },
      maxFraction: { default: 0.7, min: 0, max: 1, description: 'final fraction of light that sees the stuck layer' },
      offsetPerMin: { default: 0.002, min: 0, max: 1, description: 'film offset growth, absorbance per min' },
    },
  },
  'stalled-reaction': {
    kinds: ['reactor'],
    description: 'the rate constant drops from onset (catalyst poisoning, dosing failure): a stalled or slow reaction',
    params: { rateFactor: { default: 0.05, min: 0, max: 1, description: 'rate constant multiplier after onset (0.3–0.5 for a slow reaction)' } },
  },
  'slow-drying': {
    kinds: ['dryer'],
    description: 'the drying rate drops from onset (inlet air heater or fan losing power)',
    params: { rateFactor: { default: 0.4, min: 0, max: 1, description: 'drying-rate multiplier after onset' } },
  },
  'over-wet': {
    kinds: ['dryer'],
    description: 'granules charged wetter than specified (onset must be 0)',
    params: { moisturePct: { default: 30, min: 1, max: 60, description: 'initial moisture, % w/w' } },
  },
  spikes: {
    kinds: ['dryer', 'reactor'],
    description: 'single-scan scatter spikes from a clump (dryer) or a bubble (reactor), the first at onset',
    params: {
      probability: { default: 0.04, min: 0, max: 1, description: 'chance of a spike in each scan after onset' },
      magnitude: { default: 0.15, min: 0, max: 3, description: 'typical additive offset of a spike, absorbance' },
    },
  },
  dropout: {
    kinds: ['dryer', 'reactor'],
    description: 'the analyzer sends nothing for a while from onset (the spectra are missing from stream and files)',
    params: { durationS: { default: 300, min: 1, max: 1e6, description: 'length of the gap, s' } },
  },
  'lamp-ageing': {
    kinds: ['dryer', 'reactor'],
    description: 'the source lamp dims and reddens from onset: rising, tilted baseline and more noise',
    params: {
      lossPerHour: { default: 0.35, min: 0, max: 5, description: 'intensity loss rate, fraction per hour (exponential)' },
      tiltPerHour: { default: 0.25, min: 0, max: 5, description: 'loss of the short-wavelength end relative to the long, per hour' },
    },
  },
  'bad-scans': {
    kinds: ['dryer', 'reactor'],
    description: 'occasional corrupt scans (a block of dark pixels from a readout fault), the first at onset',
    params: { probability: { default: 0.02, min: 0, max: 1, description: 'chance of a bad scan after onset' } },
  },
  'stuck-pixels': {
    kinds: ['dryer', 'reactor'],
    description: 'detector elements stick from onset: each affected pixel holds a fixed reading near its value at onset, 0.01–0.02 absorbance off (pixels drawn at random, not at the ends of the axis)',
    params: { count: { default: 3, min: 1, max: 64, description: 'pixels that stick' } },
  },
  'dead-pixels': {
    kinds: ['dryer', 'reactor'],
    description: 'detector elements die from onset: each affected pixel reads 0 (pixels drawn at random)',
    params: { count: { default: 3, min: 1, max: 64, description: 'pixels that die' } },
  },
  'pixel-spikes': {
    kinds: ['dryer', 'reactor'],
    description: 'single-pixel spikes (a cosmic ray or electrical interference on one detector element) in some scans from onset, the first at onset; each spike raises one random pixel',
    params: {
      probability: { default: 0.3, min: 0, max: 1, description: 'chance of spikes in each scan after onset' },
      count: { default: 2, min: 1, max: 16, description: 'spiked pixels in a scan with spikes' },
      magnitude: { default: 0.1, min: 0.02, max: 3, description: 'typical spike height, absorbance (0.5–1.5 times this)' },
    },
  },
  saturation: {
    kinds: ['dryer', 'reactor'],
    description: 'the detector saturates from onset in its brightest part (too much light after a lamp or window change): a run of adjacent pixels at the middle of the axis reads the lowest absorbance of the scan, a flat clipped run',
    params: { count: { default: 6, min: 3, max: 128, description: 'adjacent pixels that saturate' } },
  },
};

export interface ResolvedFault {
  type: FaultType;
  onsetS: number;
  params: Record<string, number>;
  /** Index in the caller's fault list, for naming derived random streams. */
  ordinal: number;
}

/** Validate fault specs for a process and fill parameter defaults. Throws naming the problem. */
export function resolveFaults(kind: ProcessKind, specs: readonly FaultSpec[] | undefined): ResolvedFault[] {
  const out: ResolvedFault[] = [];
  (specs ?? []).forEach((f, ordinal) => {
    const info = Object.hasOwn(FAULT_INFO, f.type) ? FAULT_INFO[f.type] : undefined;
    if (!info) throw new Error(`fault ${ordinal}: unknown type "${f.type}"; known: ${FAULT_TYPES.join(', ')}`);
    if (!info.kinds.includes(kind)) throw new Error(`fault ${ordinal}: "${f.type}" applies to ${info.kinds.join(' and ')}, not to the ${kind}`);
    if (!Number.isFinite(f.onsetS) || f.onsetS < 0) throw new Error(`fault ${ordinal} (${f.type}): onset ${f.onsetS} s must be a non-negative number`);
    if (f.type === 'over-wet' && f.onsetS !== 0) throw new Error(`fault ${ordinal} (over-wet): the granules are charged wet, so the onset must be 0, not ${f.onsetS} s`);
    const params: Record<string, number> = {};
    for (const [name, p] of Object.entries(info.params)) params[name] = p.default;
    for (const [name, v] of Object.entries(f.params ?? {})) {
      const p = Object.hasOwn(info.params, name) ? info.params[name] : undefined;
      if (!p) throw new Error(`fault ${ordinal} (${f.type}): unknown parameter "${name}"; known: ${Object.keys(info.params).join(', ') || 'none'}`);
      if (!Number.isFinite(v) || v < p.min || v > p.max) throw new Error(`fault ${ordinal} (${f.type}): ${name} = ${v} is outside ${p.min}…${p.max}`);
      params[name] = v;
    }
    out.push({ type: f.type, onsetS: f.onsetS, params, ordinal });
  });
  return out;
}

/**
 * Parse a fault given on the command line: `TYPE@MINUTES` or `TYPE@MINUTES:name=value,name=value`,
 * e.g. `probe-fouling@25:tauMin=10` (onset 25 min after batch start).
 */
export function parseFaultArg(text: string): FaultSpec {
  const m = /^([a-z-]+)@([0-9]+(?:\.[0-9]+)?)(?::(.*))?$/.exec(text.trim());
  if (!m) throw new Error(`fault "${text}" is not TYPE@MINUTES[:name=value,...], e.g. probe-fouling@25:tauMin=10`);
  const type = m[1] as FaultType;
  if (!FAULT_TYPES.includes(type)) throw new Error(`fault "${text}": unknown type "${m[1]}"; known: ${FAULT_TYPES.join(', ')}`);
  const params: Record<string, number> = {};
  if (m[3]) {
    for (const kv of m[3].split(',')) {
      const [k, v] = kv.split('=');
      const num = Number(v);
      if (!k || v === undefined || v.trim() === '' || !Number.isFinite(num)) throw new Error(`fault "${text}": parameter "${kv}" is not name=number`);
      params[k] = num;
    }
  }
  return { type, onsetS: Number(m[2]) * 60, params };
}
