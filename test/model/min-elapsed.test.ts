/**
 * minElapsedMin 'auto': the lower one-sided prediction bound for one new batch's endpoint time,
 * on ln(time), exp(mean − t(conf; I − 1)·s·√(1 + 1/I)), never above the shortest known endpoint.
 * Held against the same bound computed with scipy (t quantile) at test time.
 */
import { execFileSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import { autoMinElapsed } from '../../core/model/endpoint-calibration.ts';
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
    expect(r90.method).toMatch(/^'auto': lower one-sided 90 % prediction bound for one new batch's endpoint time from the 7 known endpoints/);
    expect(Math.abs(autoMinElapsed(ENDS, 0.99).value / ref[1]! - 1)).toBeLessThan(1e-10);
  });
  it('is never above the shortest known endpoint', () => {
    // nearly equal endpoints: the bound lies above the shortest, and is capped there
    const r = autoMinElapsed([50, 50.01, 50.02], 0.6);
    expect(r.value).toBe(50);
    expect(r.method).toMatch(/capped at the shortest known endpoint 50\.0 min/);
  });
  it('names what it needs', () => {
    expect(() => autoMinElapsed([50], 0.99)).toThrow(/at least 2 reference batches \(got 1\)/);
    expect(() => autoMinElapsed([50, 0], 0.99)).toThrow(/known endpoint at 0 min/);
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
    const ends = m.meta.referenceEndpoints!.map((e) => e.elapsedMin);
    const want = autoMinElapsed(ends, 0.99);
    expect(m.endpoint.minElapsedMin).toBeCloseTo(want.value, 12);
    expect(m.endpoint.minElapsedMethod).toBe(want.method);
    expect(parseMonitoringModel(serializeMonitoringModel(m)).endpoint.minElapsedMin).toBe(m.endpoint.minElapsedMin);
    for (const [bi, r] of m.meta.endpointCheck!.rows.entries()) {
      const without = autoMinElapsed(ends.filter((_, j) => j !== bi), 0.99).value;
      if (r.firedMin !== null) expect(r.firedMin).toBeGreaterThanOrEqual(without);
    }
  });
  it("a fixed minimum is the owner's; 'auto' needs every batch's endpoint", () => {
    const m = buildMonitoringModel(refs, { ...base, endpoint: { ...base.endpoint, minElapsedMin: 12 } });
    expect(m.endpoint).toMatchObject({ minElapsedMin: 12, minElapsedMethod: 'set by the model owner' });
    const noLab = refs.map((b, i) => (i === 2 ? { ...b, property: undefined } : b));
    expect(() => buildMonitoringModel(noLab, base)).toThrow(/calibrates the minimum time 'auto' on the reference batches' known endpoints, and 1 reference batch has none/);
    // older models (no minimum) load as none
    const plain = buildMonitoringModel(refs, { ...base, endpoint: { ...base.endpoint, minElapsedMin: undefined } });
    expect(plain.endpoint.minElapsedMin).toBeUndefined();
  });
});
