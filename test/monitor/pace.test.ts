/**
 * Pace against the golden batches (core/monitor/pace.ts): z of ln(time taken) against the reference
 * batches' ln(time for the same stretch), checked against numpy at test time; anchoring; and, in
 * the monitor, a stalled batch raises the pace condition while a good one does not.
 */
import { beforeAll, describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { PaceCheck } from '../../core/monitor/pace.ts';
import type { Envelope } from '../../core/envelope/envelope.ts';
import { simulateBatch, simulateReferenceSet, type SimulatedBatch } from '../../simulators/batch.ts';
import { buildMonitoringModel, type MonitoringModel } from '../../core/model/monitoring-model.ts';
import { createBatchMonitor } from '../../core/monitor/batch-monitor.ts';
import { resolveBuildSettings } from '../../core/model/build-settings.ts';
import { DRYER_TEST_SETTINGS } from './settings-fixture.ts';

// Five reference batches on a 6-point grid: minutes at which each reached each point (null: never /
// started beyond). Batch 4 started beyond point 1.
const tap: (number | null)[][] = [
  [0, 5, 11, 18, 26, 35],
  [0, 6, 13, 21, 30, 40],
  [0, 4, 9, 15, 22, 30],
  [0, 5, 12, 19, null, null],
  [null, null, 10, 16, 23, 31],
];
const env = { grid: [0, 1, 2, 3, 4, 5], nBatches: 5, timeAtProgress: tap } as unknown as Envelope;

function numpyZ(k0: number, next: number, took: number): number {
  const py = `import json, numpy as np
tap = ${JSON.stringify(tap).replace(/null/g, 'None')}
d = [r[${next}] - r[${k0}] for r in tap if r[${k0}] is not None and r[${next}] is not None]
l = np.log(d)
print(json.dumps((np.log(${took}) - l.mean()) / l.std(ddof=1)))`;
  return Number(execFileSync('python3', ['-c', py]).toString());
}

describe('PaceCheck', () => {
  it('anchors where the batch first moves on, then z of ln(time) against the reference stretch (numpy)', () => {
    const p = new PaceCheck(env, 3, 3, 1);
    // waits at its first point: nothing judged, whatever the time
    expect(p.update(1, 2)).toBeNull();
    expect(p.update(1, 20)).toBeNull();
    // moves on to point 2 at 24 min: the anchor (k0 = 2, t0 = 24; no time taken yet); the next point is 3
    expect(p.update(2, 24)).toBeNull();
    const s = p.update(2, 31)!; // 7 min since the anchor without reaching point 3
    expect(s.tookMin).toBeCloseTo(7, 12);
    expect(s.z).toBeCloseTo(numpyZ(2, 3, 7), 10);
    // a stall at point 2: z only grows with the clock
    const later = [40, 60, 90].map((t) => p.update(2, t)!.z);
    expect(later[0]!).toBeLessThan(later[1]!);
    expect(later[1]!).toBeLessThan(later[2]!);
    // at point 4 (next 5): batches 1, 2, 3, 5 passed points 2 and 5
    expect(p.update(4, 24 + 12)!.z).toBeCloseTo(numpyZ(2, 5, 12), 10);
    // expected and upper times: exp(mean ln d) and exp(mean + k·sd)
    const st = p.update(4, 40)!;
    const ds = [24, 27, 21, 21].map(Math.log);
    const m = ds.reduce((a, x) => a + x, 0) / 4;
    const sd = Math.sqrt(ds.reduce((a, x) => a + (x - m) ** 2, 0) / 3);
    expect(st.expectedMin).toBeCloseTo(Math.exp(m), 10);
    expect(st.upperMin).toBeCloseTo(Math.exp(m + 3 * sd), 10);
  });

  it('does not judge with fewer reference batches than minBatches through the stretch', () => {
    const p = new PaceCheck(env, 3, 5, 1);
    p.update(0, 0);
    // point 1: batch 5 started beyond it, so only 4 passed: no anchor, nothing judged
    expect(p.update(1, 5)).toBeNull();
    expect(p.update(1, 50)).toBeNull();
  });
});

describe('pace in the batch monitor', () => {
  const settings = {
    ...DRYER_TEST_SETTINGS,
    name: 'pace',
    envelope: { k: 3, smoothing: 2, points: 60, band: 'prediction' },
    alarms: { ...DRYER_TEST_SETTINGS.alarms, limits: 'local', confidence: 0.999, pace: true },
    endpoint: { criteria: [{ kind: 'property' }], combine: 'all', confirm: 2, nearingMin: 10 },
  };
  let ref: SimulatedBatch[];
  let model: MonitoringModel;
  beforeAll(() => {
    ref = simulateReferenceSet('dryer', 10, 31, { intervalS: 30 });
    model = buildMonitoringModel(ref.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: b.truth.property.values })), settings);
  }, 120_000);
  const keysRaised = (b: SimulatedBatch, m: MonitoringModel) => {
    const mon = createBatchMonitor(m, b.times[0]!);
    const raised = new Set<string>();
    let judged = 0;
    b.spectra.forEach((s, i) => {
      const r = mon.push(i, b.times[i]!, s);
      if (r.pace) judged++;
      for (const c of r.conditionChanges) if (c.active) raised.add(c.key);
    });
    return { raised, judged };
  };

  it('a dryer whose drying rate drops to a fifth raises the pace condition; the message gives the times', () => {
    const slow = simulateBatch('dryer', { seed: 90_001, intervalS: 30, faults: [{ type: 'slow-drying', onsetS: 900, params: { rateFactor: 0.2 } }] });
    const mon = createBatchMonitor(model, slow.times[0]!);
    let msg = '';
    slow.spectra.forEach((s, i) => {
      const r = mon.push(i, slow.times[i]!, s);
      for (const c of r.conditionChanges) if (c.active && c.key === 'pace' && !msg) msg = c.message;
    });
    expect(msg).toMatch(/^pace: [\d.]+ min without reaching the next progress point; the golden batches took [\d.]+ min \(alarm beyond [\d.]+ min, 99\.9 %\)$/);
  });

  it('good batches are judged for pace and raise no pace condition', () => {
    for (const seed of [90_101, 90_102, 90_103]) {
      const { raised, judged } = keysRaised(simulateBatch('dryer', { seed, intervalS: 30 }), model);
      expect(judged).toBeGreaterThan(10);
      expect(raised.has('pace')).toBe(false);
    }
  });

  it('pace is still judged after done: a batch called done early that then dries slowly is flagged', () => {
    // A rule that calls done early on purpose (any of: the property target, or a moving-block SD
    // threshold so wide that it is met from the start; guards off), then the drying rate drops to a
    // fifth: the pace alarm still comes up, after the endpoint call.
    const early = buildMonitoringModel(ref.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: b.truth.property.values })), {
      ...settings, endpoint: { criteria: [{ kind: 'property' }, { kind: 'mbsd', block: 5, threshold: 1e6 }], combine: 'any', confirm: 2, nearingMin: 10, hold: { alarms: false, extrapolation: false } },
    });
    const slow = simulateBatch('dryer', { seed: 90_001, intervalS: 30, faults: [{ type: 'slow-drying', onsetS: 900, params: { rateFactor: 0.2 } }] });
    const mon = createBatchMonitor(early, slow.times[0]!);
    let doneAt = -1;
    let paceAt = -1;
    let judgedAfterDone = 0;
    slow.spectra.forEach((s, i) => {
      const r = mon.push(i, slow.times[i]!, s);
      if (doneAt < 0 && r.endpoint.state === 'done') doneAt = i;
      if (doneAt >= 0 && r.pace) judgedAfterDone++;
      if (paceAt < 0 && r.conditionChanges.some((c) => c.key === 'pace' && c.active)) paceAt = i;
    });
    expect(doneAt).toBeGreaterThan(0);
    expect(judgedAfterDone).toBeGreaterThan(0);
    expect(paceAt).toBeGreaterThan(doneAt);
  });

  it('a slow batch stays flagged past the golden end progress: the pace alarm stands at done and at the batch end', () => {
    // the drying rate drops to about a third: the batch still reaches its endpoint, late, and runs on past the golden end
    const slow = simulateBatch('dryer', { seed: 90_002, intervalS: 30, faults: [{ type: 'slow-drying', onsetS: 900, params: { rateFactor: 0.35 } }] });
    const mon = createBatchMonitor(model, slow.times[0]!);
    let paceAt = -1;
    let doneAt = -1;
    let unjudgedAfterPace = 0;
    let last: ReturnType<typeof mon.push> | null = null;
    const cleared: string[] = [];
    slow.spectra.forEach((s, i) => {
      const r = mon.push(i, slow.times[i]!, s);
      if (paceAt < 0 && r.conditionChanges.some((c) => c.key === 'pace' && c.active)) paceAt = i;
      if (paceAt >= 0 && !r.pace) unjudgedAfterPace++;
      if (doneAt < 0 && r.endpoint.state === 'done') doneAt = i;
      for (const c of r.conditionChanges) if (c.key === 'pace' && !c.active) cleared.push(c.message);
      if (doneAt === i) expect(r.activeConditions).toContain('pace');
      last = r;
    });
    expect(paceAt).toBeGreaterThan(0);
    expect(doneAt).toBeGreaterThan(paceAt);
    expect(unjudgedAfterPace).toBeGreaterThan(0); // it did run past where pace can be judged
    expect(cleared).toEqual([]);
    expect(last!.activeConditions).toContain('pace');
  });

  it('alarms.pace on a time axis is refused at build, naming the field, instead of being silently left out', () => {
    const given = { ...settings, progress: { kind: 'time' } };
    expect(() => resolveBuildSettings(given)).toThrow(/^build settings: alarms\.pace needs progress on an indicator variable .* its pace cannot be judged$/);
    expect(resolveBuildSettings({ ...given, alarms: { ...settings.alarms, pace: false } }).alarms.pace).toBe(false);
    expect(resolveBuildSettings(settings).alarms.pace).toBe(true);
  });

  it('models without alarms.pace have no pace condition (an approved model keeps its meaning)', () => {
    const m = buildMonitoringModel(ref.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: b.truth.property.values })), { ...settings, alarms: { ...settings.alarms, pace: undefined } });
    const r = createBatchMonitor(m, ref[0]!.times[0]!).push(0, ref[0]!.times[0]!, ref[0]!.spectra[0]!);
    expect(r.pace).toBeUndefined();
  });
});
