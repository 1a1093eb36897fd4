/**
 * minElapsedMin 'auto': the lower one-sided prediction bound for one new batch's endpoint time,
 * on ln(time), exp(mean − t(conf; I − 1)·s·√(1 + 1/I)), never above the shortest of them — taken
 * on the EARLIEST each reference batch can have reached its endpoint (for a lab-placed endpoint the
 * last lab value not yet past the target), not on the placed endpoints, which lie late.
 * Held against the same bound computed with scipy (t quantile) at test time, and a worked example.
 */
import { execFileSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import { autoMinElapsed, endValuesOf, resolveCriteria } from '../../core/model/endpoint-calibration.ts';
import { buildMonitoringModel, parseMonitoringModel, serializeMonitoringModel } from '../../core/model/monitoring-model.ts';
import { simulateReferenceSet } from '../../simulators/batch.ts';

const ENDS = [52.3, 48.9, 55.1, 50.2, 61.7, 47.5, 53.8];
const ref = JSON.parse(
  execFileSync('python3', ['-c', `
import json, numpy as np
from scipy import stats
x = np.log(np.array(${JSON.stringify(ENDS)})); I = len(x)
out = []
for c in (0.9, 0.99):
    out.append(float(np.exp(x.mean() - stats.t.ppf(c, I - 1) * x.std(ddof=1) * np.sqrt(1 + 1 / I))))
print(json.dumps(out))`], { encoding: 'utf8' }),
) as number[];

describe("minElapsedMin 'auto' from the known endpoints", () => {
  it('is the lower prediction bound on ln(time) (scipy t quantile)', () => {
    const r90 = autoMinElapsed(ENDS, 0.9);
    expect(Math.abs(r90.value / ref[0]! - 1)).toBeLessThan(1e-10);
    expect(r90.value).toBeLessThan(Math.min(...ENDS));
    expect(r90.method).toMatch(/^'auto': lower one-sided 90 % prediction bound for one new batch's endpoint time from the earliest each of the 7 reference batches/);
    expect(Math.abs(autoMinElapsed(ENDS, 0.99).value / ref[1]! - 1)).toBeLessThan(1e-10);
  });
  it('is never above the shortest known endpoint', () => {
    // nearly equal endpoints: the bound lies above the shortest, and is capped there
    const r = autoMinElapsed([50, 50.01, 50.02], 0.6);
    expect(r.value).toBe(50);
    expect(r.method).toMatch(/capped at the shortest of them 50\.0 min/);
  });
  it('names what it needs; a batch that can have ended at its start leaves no minimum', () => {
    expect(() => autoMinElapsed([50], 0.99)).toThrow(/at least 2 reference batches \(got 1\)/);
    expect(() => autoMinElapsed([50, -1], 0.99)).toThrow(/earliest endpoint at -1 min/);
    const z = autoMinElapsed([50, 0, 48], 0.99, ['r1', 'r2', 'r3']);
    expect(z.value).toBe(0);
    expect(z.method).toMatch(/reference batch "r2" can have reached its endpoint at its start/);
  });
  it('is taken from the last lab value before the crossing, not the placed endpoint (worked example)', () => {
    // Three reference batches, lab moisture (target 2 % w/w, below), one spectrum a minute:
    //   A: 2.6 % at 40 min, 1.7 % at 46 min -> placed by interpolation at 44 min; earliest 40 min
    //   B: 2.3 % at 45 min, 1.8 % at 51 min -> placed at 48.6 -> 49 min;           earliest 45 min
    //   C: 2.9 % at 50 min, 1.9 % at 56 min -> placed at 55.4 -> 56 min;           earliest 50 min
    // By hand at 90 %: ln 40, ln 45, ln 50 = 3.68888, 3.80666, 3.91202; mean 3.80252, s 0.111629;
    // t(0.90; 2) = 1.885618 (t table), √(1 + 1/3) = 1.154701; exp(3.80252 − 1.885618·0.111629·1.154701)
    // = exp(3.55947) = 35.145 min (below the shortest earliest, 40). From the placed endpoints
    // (44, 49, 56) the same bound would be 38.0 min: a batch dried in 37 min would be held.
    const mk = (end: number, from: number) => ({ rows: [], elapsedMin: Float64Array.from({ length: 70 }, (_, i) => i), scores: [], endIndex: end, earliestEndMin: from });
    const rule = { criteria: [{ kind: 'property' as const }], combine: 'all' as const, confirm: 1, nearingMin: 5, minElapsedMin: 'auto' as const };
    const ev = endValuesOf(rule, [mk(44, 40), mk(49, 45), mk(56, 50)], ['A', 'B', 'C']);
    const prop = { name: 'moisture', unit: '% w/w', target: 2, direction: 'below' as const, rmsecv: 0.1 };
    const r = resolveCriteria(rule, ev, { A: 2, confidence: 0.9, property: prop, exclude: null }).minElapsed!;
    expect(r.value).toBeCloseTo(35.145, 3);
    expect(r.method).toMatch(/from the earliest each of the 3 reference batches can have reached its endpoint \(lab-placed: the last lab value not yet past the target; marked: the mark\)/);
    expect(r.method).toMatch(/= 35\.1 min \(shortest of them 40\.0 min\)/);
    expect(autoMinElapsed([44, 49, 56], 0.9).value).toBeCloseTo(37.99, 1);
    // without a stated earliest (e.g. older callers) the known endpoint itself is the basis
    const plain = endValuesOf(rule, [{ ...mk(44, 40), earliestEndMin: undefined }, mk(49, 45)], ['A', 'B']);
    expect(plain.earliestMin).toEqual([44, 45]);
  });
});

describe("minElapsedMin at build", () => {
  const sim = simulateReferenceSet('dryer', 5, 808, { intervalS: 30 });
  const refs = sim.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: b.truth.property.values }));
  const base = {
    name: 'm', product: 'p', author: 't', createdAt: 0, components: 3, chain: [{ step: 'scale', center: true, scaling: 'none' }],
    property: { name: 'moisture', unit: '% w/w', components: 3, target: 2, direction: 'below' },
    endpoint: { criteria: [{ kind: 'property' }], combine: 'all', confirm: 2, nearingMin: 5, minElapsedMin: 'auto' },
  };
  it("'auto' is the bound from the known endpoints, stored with its method; the check re-resolves it without each batch", () => {
    const m = buildMonitoringModel(refs, base);
    const ends = m.meta.referenceEndpoints!.map((e) => e.bracket!.fromMin);
    const want = autoMinElapsed(ends, 0.99);
    expect(m.endpoint.minElapsedMin).toBeCloseTo(want.value, 12);
    expect(m.endpoint.minElapsedMethod).toBe(want.method);
    expect(parseMonitoringModel(serializeMonitoringModel(m)).endpoint.minElapsedMin).toBe(m.endpoint.minElapsedMin);
    for (const [bi, r] of m.meta.endpointCheck!.rows.entries()) {
      const without = autoMinElapsed(ends.filter((_, j) => j !== bi), 0.99).value;
      if (r.firedMin !== null) expect(r.firedMin).toBeGreaterThanOrEqual(without);
    }
  });
  it('with sparse lab values, the minimum holds no reference batch past its true endpoint', () => {
    // A lab value every 6 minutes (every 12th spectrum) and one at the stop: the placed endpoints lie after the truth.
    const sparse = sim.map((b) => ({ ...refs.find((r) => r.id === b.id)!, property: b.truth.property.values.map((v, i) => (i % 12 === 5 || i === b.times.length - 1 ? v : NaN)) }));
    const m = buildMonitoringModel(sparse, base);
    const eps = m.meta.referenceEndpoints!;
    expect(eps).toHaveLength(sim.length);
    const want = autoMinElapsed(eps.map((e) => e.bracket!.fromMin), 0.99);
    expect(m.endpoint.minElapsedMin).toBeCloseTo(want.value, 12);
    for (const b of sim) {
      const trueMin = (b.times[b.truth.endpointIndex!]! - b.times[0]!) / 60000;
      expect(m.endpoint.minElapsedMin!).toBeLessThanOrEqual(trueMin);
    }
  });
  it("a fixed minimum is the owner's; 'auto' needs every batch's endpoint", () => {
    const m = buildMonitoringModel(refs, { ...base, endpoint: { ...base.endpoint, minElapsedMin: 12 } });
    expect(m.endpoint).toMatchObject({ minElapsedMin: 12, minElapsedMethod: 'set by the model owner' });
    const noLab = refs.map((b, i) => (i === 2 ? { ...b, property: undefined } : b));
    expect(() => buildMonitoringModel(noLab, base)).toThrow(/calibrates the minimum time 'auto' on the reference batches' known endpoints, and 1 reference batch has none/);
    // two reference batches: the leave-one-batch-out check leaves one, and the refusal says what to do
    const two = sim.slice(0, 2);
    const marked = { ...base, property: undefined, endpoint: { ...base.endpoint, criteria: [{ kind: 'mbsd', block: 5, threshold: 0.01 }] }, referenceEndpoints: two.map((b) => ({ batch: b.id, index: b.truth.endpointIndex! })) };
    expect(() => buildMonitoringModel(refs.slice(0, 2).map((b) => ({ ...b, property: undefined })), marked)).toThrow(/minimum time 'auto' needs the known endpoints of at least 2 reference batches besides "[^"]+", which the leave-one-batch-out check of the rule leaves out; 2 of the 2 have one\. Give the minimum time in minutes \(or none\), or choose at least 3 reference batches with a known endpoint$/);
    // older models (no minimum) load as none
    const plain = buildMonitoringModel(refs, { ...base, endpoint: { ...base.endpoint, minElapsedMin: undefined } });
    expect(plain.endpoint.minElapsedMin).toBeUndefined();
  });
});
