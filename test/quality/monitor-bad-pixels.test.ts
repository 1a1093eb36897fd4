/**
 * The batch monitor with bad pixels: a spectrum with a few is judged by trimmed score regression
 * and marked; one too damaged is not judged and moves no state; repeated damage raises the
 * analyzer-quality condition, which clears again on clean spectra.
 */
import { beforeAll, describe, expect, it } from 'vitest';
import { simulateBatch, simulateReferenceSet, type SimulatedBatch } from '../../simulators/batch.ts';
import { buildMonitoringModel, type MonitoringModel } from '../../core/model/monitoring-model.ts';
import { createBatchMonitor, PIXEL_QUALITY_KEY } from '../../core/monitor/batch-monitor.ts';
import type { MonitorResult } from '../../core/monitor/types.ts';
import { DRYER_TEST_SETTINGS } from '../monitor/settings-fixture.ts';

let model: MonitoringModel;
let good: SimulatedBatch;

beforeAll(() => {
  const ref = simulateReferenceSet('dryer', 6, 11);
  model = buildMonitoringModel(ref.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: b.truth.property.values })), DRYER_TEST_SETTINGS);
  good = simulateBatch('dryer', { seed: 777001 });
}, 120_000);

function damaged(i: number, pixels: number[], value: (j: number, x: Float32Array) => number): Float32Array {
  const x = Float32Array.from(good.spectra[i]!);
  for (const j of pixels) x[j] = value(j, x);
  return x;
}

describe('batch monitor with bad pixels', () => {
  it('scores a spectrum with a few spiked pixels by TSR, close to the clean spectrum, and marks it', () => {
    const clean = createBatchMonitor(model, good.times[0]!);
    const dirty = createBatchMonitor(model, good.times[0]!);
    const off = createBatchMonitor(model, good.times[0]!, { pixelQuality: false });
    let a: MonitorResult | null = null;
    let b: MonitorResult | null = null;
    let c: MonitorResult | null = null;
    for (let i = 0; i <= 60; i++) {
      const x = i === 60 ? damaged(i, [40, 90, 160], (j, v) => v[j]! + 0.4) : good.spectra[i]!;
      a = clean.push(i, good.times[i]!, good.spectra[i]!);
      b = dirty.push(i, good.times[i]!, x);
      c = off.push(i, good.times[i]!, x);
    }
    expect(a!.quality).toBeUndefined();
    expect(b!.quality).toMatchObject({ judged: true, scoredBy: 'tsr', badPixels: 3, missingVariables: 3, pixels: [40, 90, 160] });
    expect(b!.quality!.flags.spike).toBe(3);
    // TSR keeps the statistics near the clean spectrum's; judged as sent, Q explodes
    expect(Math.abs(b!.q - a!.q)).toBeLessThan(0.5 * a!.limits.q);
    expect(c!.q).toBeGreaterThan(10 * a!.limits.q);
    for (let k = 0; k < a!.scores.length; k++) expect(Math.abs(b!.scores[k]! - a!.scores[k]!)).toBeLessThan(0.2 * Math.sqrt(model.pca.eigenvalues[k]!));
  });

  it('stores but does not judge a spectrum with too many bad pixels; no state moves', () => {
    const ref = createBatchMonitor(model, good.times[0]!);
    const mon = createBatchMonitor(model, good.times[0]!);
    const refResults: MonitorResult[] = [];
    const results: MonitorResult[] = [];
    const block = Array.from({ length: 40 }, (_, k) => 100 + k);
    for (let i = 0; i < 120; i++) {
      if (i === 70) {
        const r = mon.push(i, good.times[i]!, damaged(i, block, () => 0));
        expect(r.quality).toMatchObject({ judged: false, scoredBy: null, badPixels: 40 });
        expect(r.quality!.flags.dead).toBe(40);
        expect(r.quality!.reason).toMatch(/40 of 256 pixels are bad \(dead 40\)/);
        expect(Number.isNaN(r.t2) && Number.isNaN(r.q)).toBe(true);
        expect(r.progress).toBe(results[results.length - 1]!.progress);
        expect(r.endpoint.state).toBe(results[results.length - 1]!.endpoint.state);
        continue;
      }
      refResults.push(ref.push(i, good.times[i]!, good.spectra[i]!));
      results.push(mon.push(i, good.times[i]!, good.spectra[i]!));
    }
    // Apart from the skipped spectrum, the two monitors judged the same (the progress tracker and
    // the windows never saw it).
    const strip = (r: MonitorResult) => ({ t2: r.t2, q: r.q, scores: r.scores, progress: r.progress, endpoint: r.endpoint.state, active: r.activeConditions });
    expect(results.map(strip)).toEqual(refResults.map(strip));
  });

  it('raises the analyzer-quality condition on repeated bad pixels and clears it on clean spectra', () => {
    const mon = createBatchMonitor(model, good.times[0]!);
    const changes: { i: number; active: boolean; kind: string; key: string; message: string }[] = [];
    const stuck = [33, 34];
    const frozen = good.spectra[50]!;
    for (let i = 50; i < 90; i++) {
      const x = i < 70 ? damaged(i, stuck, (j) => frozen[j]!) : good.spectra[i]!;
      const r = mon.push(i, good.times[i]!, x);
      for (const c of r.conditionChanges) if (c.kind === 'analyzer') changes.push({ i, active: c.active, kind: c.kind, key: c.key, message: c.message });
      if (i === 60) {
        expect(r.quality).toMatchObject({ judged: true, scoredBy: 'tsr', flags: { stuck: 2 } });
        expect(r.activeConditions).toContain(PIXEL_QUALITY_KEY);
      }
    }
    // stuck from the 5th frozen spectrum (index 54), active on the 3rd flagged one (56); clean
    // from 70, cleared after offDelay 5 clean spectra (74)
    expect(changes.map((c) => [c.i, c.active])).toEqual([[56, true], [74, false]]);
    expect(changes[0]!.key).toBe(PIXEL_QUALITY_KEY);
    expect(changes[0]!.message).toMatch(/stuck 2/);
  });
});
