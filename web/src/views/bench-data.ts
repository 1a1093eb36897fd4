/** Pure helpers for Model bench: chain presets, preview data, evaluation figures. */
import type { BatchEvaluation, EvaluationResult } from '../../../core/api/rest.ts';
import type { ChainSpec } from '../../../core/preprocess/index.ts';

export const CHAIN_PRESETS: { id: string; label: string; chain: ChainSpec; note: string }[] = [
  {
    id: 'sg1-centre',
    label: 'Savitzky–Golay 1st derivative (15 points, quadratic), mean-centre',
    chain: [
      { step: 'savgol', window: 15, polyorder: 2, deriv: 1 },
      { step: 'scale', center: true, scaling: 'none' },
    ],
    note: 'Keeps intensity changes that carry moisture information; removes baseline offset.',
  },
  {
    id: 'snv-sg1-centre',
    label: 'SNV, Savitzky–Golay 1st derivative (15, quadratic), mean-centre',
    chain: [{ step: 'snv' }, { step: 'savgol', window: 15, polyorder: 2, deriv: 1 }, { step: 'scale', center: true, scaling: 'none' }],
    note: 'Scatter correction: in drying it can remove intensity changes that carry moisture information (Bogomolov, Mannhardt & Heinzerling 2018).',
  },
  {
    id: 'centre',
    label: 'Mean-centre only',
    chain: [{ step: 'scale', center: true, scaling: 'none' }],
    note: 'Raw absorbance, centred on the calibration mean.',
  },
];

export { spreadIndices } from '../../../core/stats/spread-indices.ts';

/** Figures summarising an evaluation: per group (good / faulty) false-alarm rate, detection delay. */
export interface EvaluationSummary {
  good: { batches: number; withAlarm: number; falseAlarmRate: number | null; pointsOutsideRate: number | null };
  faulty: { batches: number; detected: number; meanDelayMin: number | null };
  endpoint: { batches: number; reached: number };
}

/**
 * `faulty` names the batches known to be faulty; every other evaluated batch is a good one.
 * Detection delay is measured from `faultOnset[batch]` (ms) when given, else from the batch start.
 */
export function summariseEvaluation(e: EvaluationResult, faulty: Set<string>, starts: Map<string, number>, faultOnset: Map<string, number> = new Map()): EvaluationSummary {
  const good = e.batches.filter((b) => !faulty.has(b.batch));
  const bad = e.batches.filter((b) => faulty.has(b.batch));
  const spectraGood = good.reduce((a, b) => a + b.spectra, 0);
  const outsideGood = good.reduce((a, b) => a + b.pointsOutside, 0);
  const delays = bad
    .filter((b): b is BatchEvaluation & { firstAlarmAt: number } => b.firstAlarmAt !== null)
    .map((b) => (b.firstAlarmAt - (faultOnset.get(b.batch) ?? starts.get(b.batch) ?? b.firstAlarmAt)) / 60000);
  return {
    good: {
      batches: good.length,
      withAlarm: good.filter((b) => b.alarms > 0).length,
      falseAlarmRate: good.length ? good.filter((b) => b.alarms > 0).length / good.length : null,
      pointsOutsideRate: spectraGood ? outsideGood / spectraGood : null,
    },
    faulty: { batches: bad.length, detected: delays.length, meanDelayMin: delays.length ? delays.reduce((a, b) => a + b, 0) / delays.length : null },
    endpoint: { batches: e.batches.length, reached: e.batches.filter((b) => b.endpointAt !== null).length },
  };
}

/**
 * Default build settings sent with a build request, from the form. alarmConfidence: raise alarms at
 * this higher confidence than the limits drawn (action limits); omitted or equal: at the drawn limits.
 */
export function buildSettingsFromForm(f: { chain: ChainSpec; components: number | 'auto'; confidence: number; alarmConfidence?: number; excludeSpectra?: { batch: string; index: number }[]; referenceEndpoints?: EndpointMark[] }): Record<string, unknown> {
  const s: Record<string, unknown> = { chain: f.chain, components: f.components, confidence: f.confidence };
  if (f.alarmConfidence !== undefined && f.alarmConfidence > f.confidence) s.alarms = { confidence: f.alarmConfidence };
  if (f.excludeSpectra && f.excludeSpectra.length) s.excludeSpectra = f.excludeSpectra;
  if (f.referenceEndpoints && f.referenceEndpoints.length) s.referenceEndpoints = f.referenceEndpoints;
  return s;
}

/** A reference batch's endpoint marked by the model owner (settings.referenceEndpoints). */
export type EndpointMark = { batch: string; elapsedMin: number } | { batch: string; index: number } | { batch: string; last: true };

/**
 * The endpoint typed for a reference batch in the builder: empty = none (lab values decide);
 * minutes from the batch start (`52.5`, `52.5 min`); a spectrum as `#316`; `last` only when the
 * batch really ended at its last spectrum. Throws naming the batch and what is accepted.
 */
export function parseEndpointMark(batch: string, text: string): EndpointMark | null {
  const t = text.trim().toLowerCase();
  if (t === '') return null;
  if (t === 'last') return { batch, last: true };
  const idx = /^#\s*(\d+)$/.exec(t);
  if (idx) return { batch, index: Number(idx[1]) };
  const min = /^(\d+(?:[.,]\d+)?)\s*(?:min)?$/.exec(t);
  if (min) return { batch, elapsedMin: Number(min[1]!.replace(',', '.')) };
  throw new RangeError(`endpoint of ${batch}: "${text}" is not minutes (e.g. 52.5), a spectrum (#316) or "last"`);
}
