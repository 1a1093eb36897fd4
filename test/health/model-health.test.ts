import { describe, expect, it } from 'vitest';
import { modelHealth, healthBatchFigures, type HealthBatch, type HealthInput } from '../../core/health/model-health.ts';
import { compareBatch, shadowComparison, type ComparedResult } from '../../core/shadow/compare.ts';
import { createPrng } from '../../core/stats/prng.ts';
import type { ShadowRun } from '../../core/api/model-life.ts';

const DAY = 86_400_000;

/** Batch figures drawn like a good process: 300 spectra, points beyond a 99 % limit with p = 0.01, batch-mean scores ~ N(shift, 1). */
function batches(n: number, seed: number, shiftPerBatch = 0, from = 0): HealthBatch[] {
  const rng = createPrng(seed);
  return Array.from({ length: n }, (_, i) => {
    let t2 = 0, q = 0;
    for (let s = 0; s < 300; s++) {
      if (rng.next() < 0.01) t2++;
      if (rng.next() < 0.01) q++;
    }
    const shift = i >= from ? shiftPerBatch * (i - from + 1) : 0;
    return { id: `b${i}`, startT: i * DAY, spectra: 300, t2Beyond: t2, qBeyond: q, alarms: rng.next() < 0.1 ? 1 : 0, meanScores: [rng.normal() * 2 + shift * 2, rng.normal()], labResiduals: [rng.normal() * 0.1] };
  });
}

function input(b: HealthBatch[], over: Partial<HealthInput> = {}): HealthInput {
  const rng = createPrng(99);
  return {
    version: { id: 'mm-x', name: 'dryer', version: 2, confidence: 0.99 }, units: ['dryer-1'], batches: b,
    approval: { alarms: 1, heldOut: 10 }, referenceMeanScores: Array.from({ length: 12 }, () => [rng.normal() * 2, rng.normal()]),
    property: { name: 'moisture', unit: '% w/w' }, review: { dueAt: 400 * DAY, intervalDays: 365 }, now: 40 * DAY, ...over,
  };
}

describe('model health', () => {
  it('stays quiet on good batches', () => {
    const h = modelHealth(input(batches(40, 1)));
    expect(h.tests.map((t) => [t.code, t.failed])).toEqual([['alarm-rate', false], ['t2-rate', false], ['q-rate', false], ['drift', false], ['bias', false], ['review', false]]);
    expect(h.failed).toBe(false);
    expect(h.t2!.points).toBe(20 * 300);
    expect(h.drift!.charts).toHaveLength(2);
  });
  it('a slow shift of the batch-mean score (0.1 sd per batch from batch 10) turns the drift test on within 25 batches of its onset (here after 22: the shift reached 2.2 sd)', () => {
    const all = batches(40, 2, 0.1, 10);
    let on: number | null = null;
    for (let n = 1; n <= all.length && on === null; n++) if (modelHealth(input(all.slice(0, n))).tests.find((t) => t.code === 'drift')!.failed) on = n;
    expect(on).not.toBeNull();
    expect(on!).toBeGreaterThan(10);
    expect(on!).toBeLessThanOrEqual(10 + 25);
  });
  it('fails the rate test on a T² rate far above nominal, the alarm test on many alarms, bias and review', () => {
    const b = batches(20, 3).map((x) => ({ ...x, t2Beyond: 15, alarms: 2, labResiduals: [0.5 + x.labResiduals[0]! * 0.1] }));
    const h = modelHealth(input(b, { now: 500 * DAY }));
    const failed = h.tests.filter((t) => t.failed).map((t) => t.code);
    expect(failed).toEqual(['alarm-rate', 't2-rate', 'bias', 'review']);
    expect(h.t2!.interval[0]).toBeGreaterThan(0.01);
    expect(h.failed).toBe(true);
  });
  it('says what it cannot test', () => {
    const h = modelHealth(input([], { approval: null, referenceMeanScores: [], property: null, review: { dueAt: null, intervalDays: null } }));
    expect(h.tests.every((t) => t.untested && !t.failed)).toBe(true);
  });
  it('batch figures count only judged spectra', () => {
    const f = healthBatchFigures([
      { t2: 5, q: 1, limits: { t2: 4, q: 2 }, scores: [1, 2] },
      { t2: 1, q: 3, limits: { t2: 4, q: 2 }, scores: [3, 4] },
      { t2: NaN, q: NaN, limits: { t2: 4, q: 2 }, scores: [], quality: { judged: false } },
    ]);
    expect(f).toEqual({ spectra: 2, t2Beyond: 1, qBeyond: 1, meanScores: [2, 3] });
  });
});

describe('shadow comparison', () => {
  const r = (seq: number, t: number, changes: [string, boolean][] = [], done = false, pred: number | null = null): ComparedResult => ({
    seq, t, conditionChanges: changes.map(([key, active]) => ({ key, active })), events: done ? [{ type: 'endpoint-state', to: 'done', t }] : [], prediction: pred === null ? null : { value: pred },
  });
  const run: ShadowRun = { id: 'r1', unit: 'u', versionId: 'c', name: 'm', version: 2, deployedVersionId: 'd', startedAt: 0, startedBy: 'a', reason: null, endedAt: null, endedBy: null, endReason: null, batches: 1 };
  it('counts alarms, conditions caught by one only, endpoint difference and lab error', () => {
    const deployed = [r(1, 0, [], false, 3), r(2, 60_000, [['t2', true]]), r(3, 120_000, [['t2', false]], true, 2)];
    const candidate = [r(1, 0, [['q', true]], false, 3.2), r(2, 60_000, [['t2', true]]), r(3, 120_000), r(4, 300_000, [], true, 1.9)];
    const b = compareBatch({ id: 'B1', startT: 0 }, { versionId: 'd', results: deployed }, { versionId: 'c', results: candidate }, [{ seq: 1, value: 3.1 }]);
    expect(b.deployed.alarms).toBe(1);
    expect(b.candidate.alarms).toBe(2);
    expect(b.onlyCandidate).toEqual(['q']);
    expect(b.onlyDeployed).toEqual([]);
    expect(b.endpointDifferenceMin).toBe(3);
    expect(b.deployed.lab!.rmse).toBeCloseTo(0.1, 12);
    expect(b.candidate.lab!.bias).toBeCloseTo(0.1, 12);
    const s = shadowComparison(run, [b]).summary;
    expect(s.batchesOnlyCandidate).toBe(1);
    expect(s.endpointMeanDifferenceMin).toBe(3);
    expect(s.text.join(' ')).toMatch(/candidate later by 3\.0 min/);
  });
});
