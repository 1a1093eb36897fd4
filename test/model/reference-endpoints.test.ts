/**
 * Reference endpoints are known, never assumed: from lab values crossing the target (placed by
 * linear interpolation in time within the bracket of the two lab values around the crossing, at
 * the first spectrum at or after it) or marked by the model owner; the last spectrum only when
 * marked `last: true`. Rules with automatic thresholds calibrate at those endpoints only, and a
 * build whose rule needs them is refused naming the batches without one.
 */
import { describe, expect, it } from 'vitest';
import { resolveReferenceEndpoints } from '../../core/model/reference-endpoints.ts';
import { resolveBuildSettings } from '../../core/model/build-settings.ts';
import { buildMonitoringModel, parseMonitoringModel, serializeMonitoringModel, type ReferenceBatch } from '../../core/model/monitoring-model.ts';
import { movingBlockSd } from '../../core/envelope/mbsd.ts';
import { simulateReferenceSet } from '../../simulators/batch.ts';

const T0 = Date.UTC(2026, 2, 1);
/** 13 spectra a minute apart; lab values at minutes 0, 4, 8, 12 as given (NaN elsewhere). */
function labBatch(id: string, lab: Record<number, number>): { id: string; times: number[]; property: number[] } {
  return { id, times: Array.from({ length: 13 }, (_, i) => T0 + i * 60_000), property: Array.from({ length: 13 }, (_, i) => lab[i] ?? NaN) };
}
const base = { name: 'e', product: 'p', author: 't', createdAt: 0, property: { name: 'moisture', unit: '% w/w', components: 2, target: 2, direction: 'below' } };

describe('resolveReferenceEndpoints', () => {
  it('lab values bracketing the target: linear interpolation in time, first spectrum at or after it, bracket kept', () => {
    // 6.0 % at 4 min, 1.5 % at 8 min: 2 % is reached at 4 + 4·(6 − 2)/(6 − 1.5) = 7.5556 min → spectrum 8
    const s = resolveBuildSettings(base);
    const { endpoints, missing } = resolveReferenceEndpoints([labBatch('a', { 0: 12, 4: 6, 8: 1.5, 12: 1.2 })], s);
    expect(missing.size).toBe(0);
    expect(endpoints[0]).toMatchObject({ batch: 'a', index: 8, elapsedMin: 8, source: 'lab', bracket: { fromIndex: 4, toIndex: 8, fromMin: 4, toMin: 8 } });
    expect(endpoints[0]!.detail).toBe('lab moisture 6.00 % w/w at 4.0 min and 1.50 % w/w at 8.0 min bracket the 2.00 % w/w target; endpoint placed by linear interpolation in time at 7.6 min (spectrum 8, the first at or after it)');
    // 2.4 % at 4 min, 1.6 % at 8 min: 4 + 4·0.4/0.8 = 6 min → spectrum 6, inside the bracket
    const mid = resolveReferenceEndpoints([labBatch('b', { 0: 12, 4: 2.4, 8: 1.6 })], s).endpoints[0]!;
    expect(mid.index).toBe(6);
    expect(mid.bracket).toEqual({ fromIndex: 4, toIndex: 8, fromMin: 4, toMin: 8 });
  });
  it("'above' targets, and a first lab value already past the target (bracket from the batch start)", () => {
    const s = resolveBuildSettings({ ...base, property: { ...base.property, target: 99, direction: 'above' } });
    const up = resolveReferenceEndpoints([labBatch('r', { 0: 50, 4: 98, 8: 100 })], s).endpoints[0]!;
    expect(up.index).toBe(6); // 4 + 4·(99 − 98)/(100 − 98) = 6
    const early = resolveReferenceEndpoints([labBatch('r2', { 4: 99.5, 8: 99.8 })], s).endpoints[0]!;
    expect(early).toMatchObject({ index: 4, bracket: { fromIndex: 0, toIndex: 4, fromMin: 0, toMin: 4 } });
    expect(early.detail).toMatch(/already past the 99\.00 % w\/w target: endpoint placed at it, bracket from the batch start/);
  });
  it('the property criterion target wins over the property target', () => {
    const s = resolveBuildSettings({ ...base, endpoint: { criteria: [{ kind: 'property', target: 5 }], combine: 'all', confirm: 2, nearingMin: 5 } });
    expect(resolveReferenceEndpoints([labBatch('a', { 0: 12, 4: 6, 8: 1.5 })], s).endpoints[0]!.index).toBe(5); // 4 + 4·1/4.5 = 4.89
  });
  it('lab values that never reach the target, or none: no endpoint, with the reason — never the last spectrum', () => {
    const s = resolveBuildSettings(base);
    const r = resolveReferenceEndpoints([labBatch('a', { 0: 12, 4: 6, 8: 3, 12: 2.3 }), labBatch('b', {})], s);
    expect(r.endpoints).toEqual([null, null]);
    expect(r.missing.get('a')).toBe('its 4 lab values of moisture never reach the 2.00 % w/w target (last 2.30 at 12.0 min)');
    expect(r.missing.get('b')).toBe('no lab values of moisture');
  });
  it('marks decide for their batch: by index, by minutes (first spectrum at or after), last: true; lab placement noted', () => {
    const s = resolveBuildSettings({ ...base, referenceEndpoints: [{ batch: 'a', index: 10 }, { batch: 'b', elapsedMin: 6.5, note: 'operator log' }, { batch: 'c', last: true }] });
    const r = resolveReferenceEndpoints([labBatch('a', { 0: 12, 4: 6, 8: 1.5 }), labBatch('b', {}), labBatch('c', {})], s);
    expect(r.endpoints[0]).toMatchObject({ index: 10, elapsedMin: 10, source: 'marked' });
    expect(r.endpoints[0]!.detail).toBe('marked by the model owner at spectrum 10 (10.0 min) (lab values would place it at spectrum 8, 8.0 min)');
    expect(r.endpoints[1]).toMatchObject({ index: 7, elapsedMin: 7, source: 'marked' });
    expect(r.endpoints[1]!.detail).toMatch(/at 6\.5 min: spectrum 7 \(7\.0 min\), the first at or after it — operator log$/);
    expect(r.endpoints[2]).toMatchObject({ index: 12, source: 'marked-last' });
  });
  it('refuses bad marks by name', () => {
    const b = [labBatch('a', {})];
    expect(() => resolveReferenceEndpoints(b, resolveBuildSettings({ ...base, referenceEndpoints: [{ batch: 'x', index: 1 }] }))).toThrow(/names batch "x", which is not among the reference batches/);
    expect(() => resolveReferenceEndpoints(b, resolveBuildSettings({ ...base, referenceEndpoints: [{ batch: 'a', index: 1 }, { batch: 'a', last: true }] }))).toThrow(/marks batch "a" twice/);
    expect(() => resolveReferenceEndpoints(b, resolveBuildSettings({ ...base, referenceEndpoints: [{ batch: 'a', index: 13 }] }))).toThrow(/has 13 spectra; index 13 is beyond its last \(12\)/);
    expect(() => resolveReferenceEndpoints(b, resolveBuildSettings({ ...base, referenceEndpoints: [{ batch: 'a', elapsedMin: 12.5 }] }))).toThrow(/lasts 12\.0 min; elapsedMin 12\.5/);
    expect(() => resolveBuildSettings({ ...base, referenceEndpoints: [{ batch: 'a', index: 1, elapsedMin: 2 }] })).toThrow(/referenceEndpoints\.0: give exactly one of index/);
    expect(() => resolveBuildSettings({ ...base, referenceEndpoints: [{ batch: 'a' }] })).toThrow(/give exactly one of/);
    expect(() => resolveBuildSettings({ ...base, referenceEndpoints: [{ batch: 'a', last: false }] })).toThrow(/referenceEndpoints\.0\.last/);
  });
});

describe('build: automatic thresholds at the known endpoints only', () => {
  const sim = simulateReferenceSet('dryer', 5, 77, { intervalS: 30 });
  /** Sparse lab values (every 8th spectrum) on every batch; batch 4 stops before its values reach the target. */
  const batches: ReferenceBatch[] = sim.map((b, bi) => {
    const cut = bi === 4 ? Math.max(20, b.truth.endpointIndex! - 12) : b.spectra.length;
    return {
      id: b.id, axis: b.axis, times: b.times.slice(0, cut), spectra: b.spectra.slice(0, cut),
      property: Array.from({ length: cut }, (_, i) => (i % 8 === 0 ? b.truth.property.values[i]! : NaN)),
    };
  });
  const settings = {
    ...base, components: 3, property: { name: 'moisture', unit: '% w/w', components: 3, target: 2, direction: 'below' },
    endpoint: { criteria: [{ kind: 'mbsd', block: 4, threshold: 'auto' }], combine: 'all', confirm: 2, nearingMin: 5 },
  };
  it('a rule calibrated at endpoints is refused when a batch has none, naming it and how to give it', () => {
    expect(() => buildMonitoringModel(batches, settings)).toThrow(
      new RegExp(`moving-block SD threshold 'auto' on the reference batches' known endpoints, and 1 reference batch has none: "${sim[4]!.id}" \\(its \\d+ lab values of moisture never reach the 2\\.00 % w/w target .*\\)\\. Give their endpoints — lab values of moisture that cross the 2\\.00 % w/w target .*settings\\.referenceEndpoints`),
    );
  });
  it('with the batch marked, the MBSD threshold is the smallest MBSD over the block ending at each known endpoint', () => {
    const mark = { batch: sim[4]!.id, index: batches[4]!.times.length - 5, note: 'from the batch record' };
    const m = buildMonitoringModel(batches, { ...settings, referenceEndpoints: [mark] });
    const eps = m.meta.referenceEndpoints!;
    expect(eps.map((e) => e.source)).toEqual(['lab', 'lab', 'lab', 'lab', 'marked']);
    // recompute: model chain on each batch's spectra, MBSD over the 4 spectra up to the endpoint
    const atEnd = batches.map((b, bi) => {
      const e = eps[bi]!.index;
      const rows = b.spectra.slice(e - 3, e + 1).map((x) => { const o = new Float64Array(m.chain.outputAxis.length); m.chain.apply(x, o); return o; });
      return movingBlockSd(rows, 4)[0]!;
    });
    const c = m.endpoint.criteria[0]!;
    if (c.kind !== 'mbsd') throw new Error('mbsd expected');
    expect(c.threshold).toBeCloseTo(Math.min(...atEnd), 12);
    expect(c.method).toMatch(/^'auto': the smallest MBSD over the 4 spectra up to the known endpoint among 5 reference batches/);
    // the endpoint minutes the envelope keeps are the known ones
    m.envelope.endMin.forEach((v, bi) => expect(v).toBeCloseTo(eps[bi]!.elapsedMin, 9));
    const back = parseMonitoringModel(serializeMonitoringModel(m));
    expect(back.meta.referenceEndpoints).toEqual(eps);
  });
  it('a rule that needs no end region builds without the endpoint; the batch is named in a note and left out of the time to endpoint', () => {
    const m = buildMonitoringModel(batches, { ...settings, endpoint: { criteria: [{ kind: 'property' }], combine: 'all', confirm: 2, nearingMin: 5 } });
    expect(m.meta.referenceEndpoints!.map((e) => e.batch)).not.toContain(sim[4]!.id);
    expect(m.envelope.endMin[4]).toBeNull();
    expect(m.meta.batches[4]!.endMin).toBeNull();
    expect(m.meta.notes).toContainEqual(expect.stringMatching(new RegExp(`No known endpoint on 1 reference batch: "${sim[4]!.id}"`)));
    expect(parseMonitoringModel(serializeMonitoringModel(m)).envelope.endMin[4]).toBeNull();
  });
  it('golden end region from the known endpoints only', () => {
    const mark = { batch: sim[4]!.id, index: 10 };
    const m = buildMonitoringModel(batches, { ...settings, referenceEndpoints: [mark], endpoint: { criteria: [{ kind: 'golden-end' }], combine: 'all', confirm: 2, nearingMin: 5 } });
    const c = m.endpoint.criteria[0]!;
    if (c.kind !== 'golden-end') throw new Error('golden-end expected');
    expect(c.limit).toBe(m.envelope.endRegion!.limit);
    expect(c.method).toMatch(/from the 5 known endpoints/);
  });
});
