import { beforeAll, describe, expect, it } from 'vitest';
import { runEvaluation, STEP_FAULTS } from '../../scripts/evaluate.ts';
import type { EvaluationFigures } from '../../core/evaluate/evaluate-model.ts';
import type { MonitoringModel } from '../../core/model/monitoring-model.ts';
import { defaultBuildSettings } from '../../core/model/default-settings.ts';

// The evaluation targets of docs/evaluation.md on simulated reactor batches (A + B → C, endpoint conversion ≥ 99 %), fixed
// seeds, with the per-kind defaults of core/model/default-settings.ts (99 % limits drawn, alarms at
// 99.9 %). Fewer fault batches than `npm run evaluate -- --kind reactor` so the test stays near a
// minute; the same 30 good batches.
let f: EvaluationFigures;
let model: MonitoringModel;

beforeAll(() => {
  const r = runEvaluation({ kind: 'reactor', reference: 30, good: 30, perFault: 2, seed: 2026, faults: [...STEP_FAULTS, 'stalled-reaction'] });
  f = r.figures;
  model = r.model;
}, 300_000);

describe('evaluation on simulated reactor batches (evaluation targets)', () => {
  it('the endpoint margin is z(0.99)·RMSECV of the conversion model', () => {
    const c = model.endpoint.criteria[0]!;
    expect(c.kind).toBe('property');
    if (c.kind !== 'property') return;
    const rmsecv = model.pls!.rmsecv![model.pls!.components - 1]!;
    // z(0.99) = 2.326348 (NIST/SEMATECH handbook 1.3.6.7.1, normal table)
    expect(c.margin!).toBeCloseTo(2.326348 * rmsecv, 5);
  });
  it('the extrapolation flag fires on about 1 − confidence of good spectra (within 3 binomial sd of 1 %)', () => {
    // measured 0.0082 on these 30 batches
    const a = 1 - f.prediction_extrapolating_confidence!;
    expect(Math.abs(f.prediction_extrapolating_rate! - a)).toBeLessThanOrEqual(3 * Math.sqrt((a * (1 - a)) / f.good_spectra));
  });
  it('false alarms on good batches: point rate within 1 % + binomial tolerance', () => {
    expect(f.good_batches).toBe(30);
    expect(f.false_alarm_point_rate).toBeLessThanOrEqual(f.false_alarm_point_rate_bound);
  });
  // With alarms at the drawn 99 % limits 2 of these 30 batches (10 of 120 in a longer run) raised a
  // confirmed envelope alarm; at the 99.9 % alarm limits 1 of 30 (good-7, whose heat-up is slower
  // than every reference batch's) and 4 of 120 (0.033, Clopper–Pearson 95 % 0.009–0.083).
  it('false_alarm_batch_rate ≤ 0.05 with the 99.9 % alarm limits', () => {
    expect(model.alarmLimits?.confidence).toBe(0.999);
    expect(f.false_alarm_batch_rate).toBeLessThanOrEqual(0.05);
  });
  it('a stalled reaction is found by its pace (the scores alone sit inside the envelope)', () => {
    // measured 18 and 29 spectra on these two batches (20 s spectra); the bound leaves room, it
    // is not a target from the issue
    expect(f.faults['stalled-reaction'].detected).toBe(2);
    for (const b of f.batches.filter((x) => x.group === 'stalled-reaction')) {
      expect(b.detection!.key).toBe('pace');
      expect(b.detection!.delay).toBeLessThanOrEqual(60);
    }
  });
  it('step faults are detected within 10 spectra of onset (median)', () => {
    for (const t of STEP_FAULTS) {
      expect(f.faults[t].batches).toBe(2);
      expect(f.detection_delay_median[t]).not.toBeNull();
      expect(f.detection_delay_median[t]!).toBeLessThanOrEqual(10);
    }
  });
  it('endpoint: never more than 1 interval early; late by the margin (median not ≤ 2: see note)', () => {
    // Near 99 % the conversion rises ~0.007 % per 20 s spectrum while the prediction error is
    // ~0.05 %: a call within ±2 intervals is beyond what the spectra carry; the conservative rule
    // trades lateness for never calling early.
    expect(f.endpoint_early_max!).toBeLessThanOrEqual(1);
    expect(f.endpoint_error_median!).toBeGreaterThanOrEqual(0);
    // One batch (good-8: 35 spectra of overrun after its true endpoint) ends before the guarded
    // prediction clears the target: the conservative rule's price, reported as endpoint_missed.
    // A second one ends held: its rule is met and confirmed, but a run-time guard (a confirmed alarm
    // standing, or its prediction outside calibration) stands to its end, so it is never called done
    // (measured 2 of 30 without a call, none early).
    expect(f.endpoint_missed).toBeLessThanOrEqual(2);
    // In the property's own units: every call lands with the true conversion at or past 99 %, less
    // at most one interval's rise (~0.007 % near 99 %, from the simulated kinetics).
    expect(f.endpoint_property_at_call!.min).toBeGreaterThanOrEqual(99 - 0.01);
    // 20 s spectra: minutes = intervals / 3
    expect(f.endpoint_error_median_min!).toBeCloseTo(f.endpoint_error_median! / 3, 9);
  });
});

describe('per-kind default settings', () => {
  it('are pure and take overrides (nested alarms/envelope merged)', () => {
    const a = defaultBuildSettings('reactor');
    expect(defaultBuildSettings('reactor')).toEqual(a);
    const b = defaultBuildSettings('dryer', { name: 'x', alarms: { onDelay: 4 } });
    expect(b.name).toBe('x');
    expect(b.alarms.onDelay).toBe(4);
    expect(b.alarms.offDelay).toBe(5);
    expect(b.property!.target).toBe(2);
    // alarms at the 99.9 % action limits, the 99 % limits drawn
    expect([a.confidence, a.alarms.confidence]).toEqual([0.99, 0.999]);
    expect(() => defaultBuildSettings('kiln' as 'dryer')).toThrow(/kind/);
  });
});
