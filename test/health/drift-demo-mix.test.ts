/**
 * The drift test on the demo's kind of run, replayed in core: the demo's dryer model (30 simulated
 * reference batches, seed 4201, the default build settings), then 60 batches drawn as scripts/demo.ts
 * draws them (seed s·100 + k; every 4th batch carries a fault that fits the dryer, its type cycling,
 * onset 15 min in — over-wet from the start), each replayed through the batch monitor and reduced to
 * its batch figures as the server does (healthBatchFigures). Counted: the batch counts 1…60 at which
 * the drift test fails.
 *
 * Observed over demo seeds 1–7, plain EWMA against the clipped one (k = 1.5): 26/0, 34/1, 11/0,
 * 22/0, 34/2, 22/5, 23/1 of 60. This file checks seed 7 (23 → 1); the good batches alone never turn
 * it on with either chart at that seed. One seeded draw, not a rate: the in-control rate is checked
 * by the Monte Carlo in exact-tests.test.ts.
 */
import { describe, expect, it } from 'vitest';
import { simulateBatch, simulateReferenceSet } from '../../simulators/batch.ts';
import { FAULT_INFO, FAULT_TYPES, type FaultSpec } from '../../simulators/faults.ts';
import { buildMonitoringModel } from '../../core/model/monitoring-model.ts';
import { defaultBuildSettings } from '../../core/model/default-settings.ts';
import { replayBatch } from '../../core/monitor/batch-monitor.ts';
import { healthBatchFigures, modelHealth, type HealthBatch, type HealthInput } from '../../core/health/model-health.ts';
import type { EwmaDesign } from '../../core/health/ewma.ts';

const SEED = 7;

describe('drift test on a demo-shaped run of good and 1-in-4 faulty dryer batches', () => {
  it('the clipped EWMA rarely fails on it (the plain one failed at 23 of 60 batch counts)', () => {
    const refs = simulateReferenceSet('dryer', 30, 4201, { unit: 'dryer-1', product: 'granule A' });
    const model = buildMonitoringModel(
      refs.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: b.truth.property.values })),
      defaultBuildSettings('dryer', { name: 'dryer-granule-A', author: 'test', product: 'granule A', createdAt: 0 }),
    );
    const fitting = FAULT_TYPES.filter((f) => FAULT_INFO[f].kinds.includes('dryer') && f !== 'dropout');
    const batches: (HealthBatch & { faulty: boolean })[] = [];
    for (let k = 0; k < 60; k++) {
      let faults: FaultSpec[] | undefined;
      if (k % 4 === 3) {
        const type = fitting[(SEED + k) % fitting.length]!;
        faults = [{ type, onsetS: type === 'over-wet' ? 0 : 900 }];
      }
      const b = simulateBatch('dryer', { seed: SEED * 100 + k, id: `dryer-1-${k}`, unit: 'dryer-1', product: 'granule A', faults });
      const { results } = replayBatch(model, b.start, b.spectra.map((v, i) => ({ seq: i, t: b.times[i]!, values: v })));
      const f = healthBatchFigures(results, { startupMin: 2, limits: 'local' });
      batches.push({ id: b.id, startT: b.start, ...f, alarms: 0, labResiduals: [], faulty: faults !== undefined });
    }
    const base: Omit<HealthInput, 'batches'> = {
      version: { id: 'v', name: 'dryer-granule-A', version: 1, confidence: 0.999 }, rates: { confidence: 0.999, limits: 'local', startupMin: 2, measured: null }, units: ['dryer-1'],
      approval: null, referenceMeanScores: model.meta.health!.meanScores, property: null, review: { dueAt: null, intervalDays: null }, now: 0,
    };
    const fails = (bs: HealthBatch[], ewma?: EwmaDesign) => {
      let n = 0;
      for (let i = 1; i <= bs.length; i++) if (modelHealth({ ...base, batches: bs.slice(0, i), ...(ewma ? { ewma } : {}) }).drift!.failed) n++;
      return n;
    };
    const plain = fails(batches, { lambda: 0.2, L: 3 });
    const clipped = fails(batches);
    const good = batches.filter((b) => !b.faulty);
    const goodClipped = fails(good);
    console.log(`demo seed ${SEED}: drift test failing at ${plain} of 60 batch counts (plain EWMA), ${clipped} (clipped); good batches alone ${goodClipped} of ${good.length}`);
    expect(plain).toBeGreaterThan(15);
    expect(clipped).toBeLessThanOrEqual(3);
    expect(goodClipped).toBe(0);
  }, 300_000);
});
