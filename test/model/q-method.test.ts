/**
 * The Q-limit method of a build (settings.qMethod) and the Box fallback where Jackson–Mudholkar is
 * undefined. Worked case (docs/check-values.md, "Q / SPE limits"): discarded eigenvalues
 * [0.8, 0.5, 0.3, 0.2, 0.1, 0.05] — h0 = 0.179159, g = 0.529487, h = 3.682809; Jackson & Mudholkar
 * (1979, Technometrics 21:341) 4.8480 / 7.3130, Box (1954) g·χ²_h 4.7488 / 6.7138 at 95 / 99 %.
 * The fallback case is held against the same formula evaluated with scipy at test time.
 */
import { describe, expect, it } from 'vitest';
import { modelQLimit } from '../../core/limits/index.ts';
import { buildMonitoringModel, parseMonitoringModel, serializeMonitoringModel } from '../../core/model/monitoring-model.ts';
import { scipyNamed } from '../limits/scipy.ts';
import { syntheticBatches } from './synthetic-batches.ts';

const theta = [1.95, 1.0325, 0.673125] as [number, number, number];
// one dominant discarded eigenvalue and many small ones: θ1θ3 > 1.5·θ2², so h0 < 0
const tail = [1, ...Array(100).fill(0.01)];
const thetaTail = [1, 2, 3].map((k) => tail.reduce((s, v) => s + v ** k, 0)) as [number, number, number];

const REF = scipyNamed({
  tail: `
lam = np.array(${JSON.stringify(tail)})
t1, t2, t3 = (lam**1).sum(), (lam**2).sum(), (lam**3).sum()
print(json.dumps([1 - 2*t1*t3/(3*t2**2), t2/t1, t1**2/t2, t2/t1*stats.chi2.ppf(0.95, t1**2/t2), t2/t1*stats.chi2.ppf(0.99, t1**2/t2)]))`,
});

describe('modelQLimit: the method of settings.qMethod, Box where Jackson–Mudholkar is undefined', () => {
  it('worked case: h0, g, h and both limits to the printed digits', () => {
    const jm95 = modelQLimit(theta, 0.95, 'jackson-mudholkar');
    expect(jm95.h0).toBeCloseTo(0.179159, 6);
    expect(jm95.g).toBeCloseTo(0.529487, 6);
    expect(jm95.h).toBeCloseTo(3.682809, 6);
    expect(Math.abs(jm95.limit.value - 4.848)).toBeLessThan(5e-5);
    expect(Math.abs(modelQLimit(theta, 0.99, 'jackson-mudholkar').limit.value - 7.313)).toBeLessThan(5e-5);
    expect(jm95.limit.method).toBe('q-jackson-mudholkar');
    expect(jm95.limit.note).toBeUndefined();
    const box = modelQLimit(theta, 0.95, 'box');
    expect(Math.abs(box.limit.value - 4.7488)).toBeLessThan(5e-5);
    expect(Math.abs(modelQLimit(theta, 0.99, 'box').limit.value - 6.7138)).toBeLessThan(5e-5);
    expect(box.limit.method).toBe('q-box');
    expect(box.limit.note).toBeUndefined();
  });
  it('h0 ≤ 0: Box g·χ²_h (scipy) with a note saying why, instead of refusing', () => {
    const [h0, g, h, b95, b99] = REF.tail!;
    expect(h0!).toBeLessThan(0);
    const r = modelQLimit(thetaTail, 0.95, 'jackson-mudholkar');
    expect(r.h0).toBeCloseTo(h0!, 10);
    expect(r.g).toBeCloseTo(g!, 10);
    expect(r.h).toBeCloseTo(h!, 10);
    expect(Math.abs(r.limit.value / b95! - 1)).toBeLessThan(1e-9);
    expect(Math.abs(modelQLimit(thetaTail, 0.99, 'jackson-mudholkar').limit.value / b99! - 1)).toBeLessThan(1e-9);
    expect(r.limit.method).toBe('q-box');
    expect(r.limit.note).toMatch(/Jackson–Mudholkar \(1979\) is undefined .*h0 = .* ≤ 0.*Box \(1954\)/);
  });
  it('names a bad method or θ', () => {
    expect(() => modelQLimit(theta, 0.99, 'imhof' as never)).toThrow(/unknown method "imhof"/);
    expect(() => modelQLimit([0, 1, 1], 0.99)).toThrow(/θ1 = 0/);
  });
});

describe('build: settings.qMethod and the fallback in the model', () => {
  // Three directions of sd 10, 5 and 1 plus noise of sd 0.1 on 200 wavelengths; with 2 PCs the
  // discarded part is one eigenvalue near 1 and ~200 near 0.01: h0 < 0.
  const batches = syntheticBatches(4, 40, 200, [10, 5, 1], 0.1, 11);
  const base = { name: 'q', product: 'p', author: 'test', createdAt: 0, components: 2, endpoint: { criteria: [{ kind: 'mbsd', block: 5, threshold: 1 }], combine: 'all', confirm: 2, nearingMin: 5 } };
  it('falls back to Box, says so in the limit and the model notes, and the file round-trips it', () => {
    const m = buildMonitoringModel(batches, { ...base, alarms: { onDelay: 3, onWindow: 5, offDelay: 5, deadband: 0.05, confidence: 0.999 } });
    const th = m.pca.residualTheta;
    const h0 = 1 - (2 * th[0] * th[2]) / (3 * th[1] ** 2);
    expect(h0).toBeLessThan(0);
    expect(m.limits.q.method).toBe('q-box');
    expect(m.limits.q.value).toBeCloseTo(modelQLimit(th, 0.99, 'box').limit.value, 12);
    expect(m.limits.q.note).toMatch(/undefined/);
    expect(m.alarmLimits!.q.method).toBe('q-box');
    const qNotes = m.meta.notes!.filter((t) => t.startsWith('Q '));
    expect(qNotes).toHaveLength(2);
    expect(qNotes[0]).toMatch(/^Q limit at 99 %: Jackson–Mudholkar/);
    expect(qNotes[1]).toMatch(/^Q alarm limit at 99\.9 %/);
    const back = parseMonitoringModel(serializeMonitoringModel(m));
    expect(back.sha256).toBe(m.sha256);
    expect(back.limits.q.note).toBe(m.limits.q.note);
    expect(back.meta.notes).toEqual(m.meta.notes);
  });
  it('qMethod "box" uses Box without a note; an unknown method is refused naming the field', () => {
    const ok = syntheticBatches(4, 40, 30, [10, 5], 0.5, 12); // discarded eigenvalues all near 0.25: h0 near 1/3
    const m = buildMonitoringModel(ok, { ...base, qMethod: 'box' });
    expect(m.limits.q.method).toBe('q-box');
    expect(m.limits.q.note).toBeUndefined();
    expect((m.meta.notes ?? []).filter((t) => t.startsWith('Q '))).toEqual([]);
    const jm = buildMonitoringModel(ok, base);
    expect(jm.limits.q.method).toBe('q-jackson-mudholkar');
    expect(() => buildMonitoringModel(ok, { ...base, qMethod: 'imhof' })).toThrow(/build settings: qMethod/);
  });
});
