/**
 * Two-level limits: the model's 99 % limits are drawn (warning / control limits), alarms are raised
 * at settings.alarms.confidence (action limits, here 99.9 %). Values checked against scipy at test
 * time: the T² limit for a new observation A(n−1)(n+1)/(n(n−A))·F(1−α; A, n−A) (Tracy, Young &
 * Mason 1992), the Q limit of Jackson & Mudholkar (1979) from the model's residual θ, and the
 * envelope band t(1 − α/(2A); I − 1)·√(1 + 1/I).
 */
import { beforeAll, describe, expect, it } from 'vitest';
import { simulateReferenceSet, type SimulatedBatch } from '../../simulators/batch.ts';
import { buildMonitoringModel, parseMonitoringModel, serializeMonitoringModel, type MonitoringModel } from '../../core/model/monitoring-model.ts';
import { createBatchMonitor } from '../../core/monitor/batch-monitor.ts';
import { scipyNamed } from '../limits/scipy.ts';
import { DRYER_TEST_SETTINGS } from './settings-fixture.ts';

const settings = {
  ...DRYER_TEST_SETTINGS,
  name: 'two-level limits',
  progress: { kind: 'time' },
  envelope: { k: 3, smoothing: 2, points: 40, band: 'prediction' },
  alarms: { ...DRYER_TEST_SETTINGS.alarms, limits: 'global', startupMin: 0, confidence: 0.999 },
  property: undefined,
  endpoint: { criteria: [{ kind: 'mbsd', block: 5, threshold: 'auto' }], combine: 'all', confirm: 3, nearingMin: 10 },
};

let ref: SimulatedBatch[];
let model: MonitoringModel;
const inputs = () => ref.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra }));

beforeAll(() => {
  ref = simulateReferenceSet('dryer', 6, 23, { intervalS: 60 });
  // the MBSD threshold 'auto' is calibrated at known endpoints: marked here at the simulated truth
  Object.assign(settings, { referenceEndpoints: ref.map((b) => ({ batch: b.id, index: b.truth.endpointIndex! })) });
  model = buildMonitoringModel(inputs(), settings);
}, 120_000);

describe('alarm (action) limits above the drawn limits', () => {
  it('are the published limits at the alarm confidence (scipy at test time)', () => {
    const al = model.alarmLimits!;
    expect(al.confidence).toBe(0.999);
    const A = model.pca.nComponents;
    const n = model.pca.nSamples;
    const I = ref.length;
    const [th1, th2, th3] = model.pca.residualTheta;
    const ref99 = scipyNamed({
      t2: `A, n = ${A}, ${n}\nprint(json.dumps([A*(n-1)*(n+1)/(n*(n-A))*stats.f.ppf(p, A, n-A) for p in (0.99, 0.999)]))`,
      q: `t1, t2, t3 = ${th1}, ${th2}, ${th3}\nh0 = 1 - 2*t1*t3/(3*t2**2)\nprint(json.dumps([t1*(stats.norm.ppf(p)*np.sqrt(2*t2*h0**2)/t1 + 1 + t2*h0*(h0-1)/t1**2)**(1/h0) for p in (0.99, 0.999)]))`,
      k: `A, I = ${A}, ${I}\nprint(json.dumps([float(stats.t.ppf(1 - a/(2*A), I-1)*np.sqrt(1 + 1/I)) for a in (0.01, 0.001)]))`,
    });
    expect(model.limits.t2.value).toBeCloseTo(ref99.t2![0]!, 6);
    expect(al.t2.value).toBeCloseTo(ref99.t2![1]!, 6);
    expect(Math.abs(model.limits.q.value / ref99.q![0]! - 1)).toBeLessThan(1e-9);
    expect(Math.abs(al.q.value / ref99.q![1]! - 1)).toBeLessThan(1e-9);
    expect(model.envelope.k).toBeCloseTo(ref99.k![0]!, 8);
    expect(al.envelopeK).toBeCloseTo(ref99.k![1]!, 8);
    // the combined index (Yue & Qin 2001) is normalised by the T² and Q limits of its own level, so
    // its alarm limit is not simply larger; it is the one computed from the alarm-level limits
    expect(al.combined.confidence).toBe(0.999);
  });

  it('per-point alarm limits lie at or above the drawn per-point limits everywhere', () => {
    const e = model.envelope;
    expect(e.t2AlarmLimit!.length).toBe(e.grid.length);
    for (let k = 0; k < e.grid.length; k++) {
      expect(e.t2AlarmLimit![k]!).toBeGreaterThanOrEqual(e.t2Limit[k]!);
      expect(e.qAlarmLimit![k]!).toBeGreaterThanOrEqual(e.qLimit[k]!);
    }
  });

  it('a T² between the drawn and the alarm limit raises no alarm; above the alarm limit it does', () => {
    // A spectrum on PC1 only: after the chain (centring) x = pca.mean + t·p1, so T² = t²/λ1 and Q = 0.
    const p = model.chain.outputAxis.length;
    const zero = new Float64Array(model.chain.inputAxis.length);
    const centred = new Float64Array(p);
    model.chain.apply(zero, centred); // = −(column means of the chain)
    const spectrumWithT2 = (t2: number): Float64Array => {
      const t = Math.sqrt(t2 * model.pca.eigenvalues[0]!);
      return Float64Array.from({ length: p }, (_, j) => -centred[j]! + model.pca.mean[j]! + t * model.pca.loadings.data[j * model.pca.nComponents]!);
    };
    const drawn = model.limits.t2.value;
    const alarm = model.alarmLimits!.t2.value;
    const mon = createBatchMonitor(model, 0);
    let seq = 0;
    const between = spectrumWithT2((drawn + alarm) / 2);
    for (let i = 0; i < 8; i++) {
      const r = mon.push(seq, seq * 60_000, between);
      seq++;
      expect(r.t2).toBeCloseTo((drawn + alarm) / 2, 6);
      expect(r.t2).toBeGreaterThan(r.limits.t2); // outside the drawn 99 % limit …
      expect(r.alarmLimits!.t2).toBeCloseTo(alarm, 9);
      expect(r.activeConditions).not.toContain('t2'); // … but no alarm
    }
    const above = spectrumWithT2(1.2 * alarm);
    const results = [0, 1, 2].map(() => mon.push(seq, seq++ * 60_000, above));
    // on-delay 3 of 5: active at the third point above the alarm limit, not before
    expect(results.map((r) => r.activeConditions.includes('t2'))).toEqual([false, false, true]);
    const change = results[2]!.conditionChanges.find((c) => c.key === 't2')!;
    expect(change.limit).toBeCloseTo(alarm, 9);
    expect(change.message).toContain('99.9 %');
  });

  it('survive the model file round trip with the same hash', () => {
    const again = parseMonitoringModel(serializeMonitoringModel(model));
    expect(again.sha256).toBe(model.sha256);
    expect(again.alarmLimits).toEqual(model.alarmLimits);
    expect(again.envelope.t2AlarmLimit).toEqual(model.envelope.t2AlarmLimit);
  });

  it('without alarms.confidence the alarms use the drawn limits (no alarmLimits in the file)', () => {
    const m = buildMonitoringModel(inputs(), { ...settings, alarms: { ...settings.alarms, confidence: undefined } });
    expect(m.alarmLimits).toBeUndefined();
    expect(m.envelope.t2AlarmLimit).toBeUndefined();
    const r = createBatchMonitor(m, ref[0]!.times[0]!).push(0, ref[0]!.times[0]!, ref[0]!.spectra[0]!);
    expect(r.alarmLimits).toEqual({ t2: m.limits.t2.value, q: m.limits.q.value, envelopeK: m.envelope.k, confidence: 0.99 });
  });

  it('refuses an alarm confidence below the drawn confidence, naming the field', () => {
    expect(() => buildMonitoringModel(inputs(), { ...settings, alarms: { ...settings.alarms, confidence: 0.95 } })).toThrow(/alarms\.confidence/);
    expect(() => buildMonitoringModel(inputs(), { ...settings, alarms: { ...settings.alarms, confidence: 1 } })).toThrow(/alarms\.confidence/);
  });
});
