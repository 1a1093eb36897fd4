/**
 * The endpoint rule replayed leave-one-batch-out at build (core/model/endpoint-check.ts): held
 * against hand-worked replays, and against the live batch monitor of a model built without the
 * batch — with centring-only preprocessing, refitting the chains per batch changes nothing (PLS
 * centres again; the moving-block SD ignores a constant per wavelength), so the two routes must
 * call done at the same spectrum.
 */
import { describe, expect, it } from 'vitest';
import { checkEndpointRule, earlyBatchesText, type CheckBatch } from '../../core/model/endpoint-check.ts';
import { endValuesOf } from '../../core/model/endpoint-calibration.ts';
import { validateEndpointRuleSpec } from '../../core/endpoint/spec.ts';
import { buildMonitoringModel, parseMonitoringModel, serializeMonitoringModel, type ReferenceBatch } from '../../core/model/monitoring-model.ts';
import { createBatchMonitor } from '../../core/monitor/batch-monitor.ts';
import { simulateReferenceSet } from '../../simulators/batch.ts';

function handBatch(id: string, predicted: number[], endIndex: number | null): CheckBatch {
  const n = predicted.length;
  return {
    id, rows: Array.from({ length: n }, () => new Float64Array(2)), elapsedMin: Float64Array.from({ length: n }, (_, i) => i * 0.5), scores: [new Float64Array(n)],
    endIndex, kept: Array.from({ length: n }, (_, i) => i), predicted,
    endpoint: endIndex === null ? null : { batch: id, index: endIndex, elapsedMin: endIndex * 0.5, source: 'lab', detail: 'test', bracket: { fromIndex: endIndex - 1, toIndex: endIndex, fromMin: (endIndex - 1) * 0.5, toMin: endIndex * 0.5 } },
  };
}

describe('checkEndpointRule on hand-worked batches', () => {
  // moisture ≤ 2 − 0.1, confirmed over 2 spectra: done at the 2nd consecutive spectrum at or below 1.9
  const spec = validateEndpointRuleSpec({ criteria: [{ kind: 'property', target: 2, margin: 0.1 }], combine: 'all', confirm: 2, nearingMin: 5 });
  const property = { name: 'moisture', unit: '% w/w', target: 2, direction: 'below' as const, rmsecv: null };
  const batches: CheckBatch[] = [
    handBatch('early', [5, 4, 1.8, 1.85, 1.7, 1.6, 1.5], 5), // done at 3 (1.8, 1.85) → 2 intervals early
    handBatch('late', [5, 4, 3, 2.5, 1.95, 1.8, 1.8, 1.7], 4), // done at 6 → 2 late
    // a marked endpoint (no lab bracket): 1.85 then 2.1 breaks it; done at 4, the mark
    { ...handBatch('on-time', [5, 1.85, 2.1, 1.9, 1.88, 1.5], 4), endpoint: { batch: 'on-time', index: 4, elapsedMin: 2, source: 'marked' as const, detail: 'test' } },
    handBatch('never', [5, 4, 3, 2.5, 2.2], 3),
    handBatch('unknown', [5, 1.5, 1.5], null),
  ];
  const ev = endValuesOf(spec, batches, batches.map((b) => b.id));
  const c = checkEndpointRule(spec, batches, ev, { A: 1, confidence: 0.99, property });
  it('finds where each batch reaches done and judges it against the known endpoint', () => {
    expect(c.rows.map((r) => [r.batch, r.firedIndex, r.intervals, r.verdict])).toEqual([
      ['early', 3, -2, 'early'],
      ['late', 6, 2, 'late'],
      ['on-time', 4, 0, 'on time'],
      ['never', null, null, 'not reached'],
      ['unknown', 2, null, 'no known endpoint'],
    ]);
    // Inside the lab bracket (source: the rule of core/model/endpoint-check.ts, stated in
    // docs/model-building.md): a known endpoint at 5 with the bracket (2, 5] — the call at 3 comes
    // after the last lab value short of the target, so it is neither early nor late as far as the
    // lab values can tell.
    const inside = { ...batches[0]!, endpoint: { ...batches[0]!.endpoint!, bracket: { fromIndex: 2, toIndex: 5, fromMin: 1, toMin: 2.5 } } };
    const c2 = checkEndpointRule(spec, [inside, batches[1]!], endValuesOf(spec, [inside, batches[1]!], ['early', 'late']), { A: 1, confidence: 0.99, property });
    expect(c2.rows[0]).toMatchObject({ verdict: 'within bracket', withinBracket: true, intervals: -2, minutes: -1, bracketMin: [1, 2.5] });
    expect(c2).toMatchObject({ early: 0, withinBracketCount: 1, earlyWithinBracket: 0, earlyMaxIntervals: 0 });
    expect(earlyBatchesText(c2)).toBe('the rule reached done before the known endpoint on no reference batch');
    // a call AT the bracket's start (the spectrum of the last lab value short of the target) is early
    const atStart = { ...batches[0]!, endpoint: { ...batches[0]!.endpoint!, bracket: { fromIndex: 3, toIndex: 5, fromMin: 1.5, toMin: 2.5 } } };
    const c3 = checkEndpointRule(spec, [atStart, batches[1]!], endValuesOf(spec, [atStart, batches[1]!], ['early', 'late']), { A: 1, confidence: 0.99, property });
    expect(c3.rows[0]).toMatchObject({ verdict: 'early', withinBracket: false });
    expect(earlyBatchesText(c3)).toContain('"early" 2 intervals (1.0 min) early (at or before its lab bracket 1.5–2.5 min began)');
    // after the known endpoint but still inside the bracket: within bracket, not late
    const lateInside = { ...batches[1]!, endpoint: { ...batches[1]!.endpoint!, bracket: { fromIndex: 3, toIndex: 7, fromMin: 1.5, toMin: 3.5 } } };
    const c4 = checkEndpointRule(spec, [batches[0]!, lateInside], endValuesOf(spec, [batches[0]!, lateInside], ['early', 'late']), { A: 1, confidence: 0.99, property });
    expect(c4.rows[1]).toMatchObject({ verdict: 'within bracket', intervals: 2 });
    expect(c.rows[0]).toMatchObject({ firedMin: 1.5, knownMin: 2.5, minutes: -1, propertyAtFire: 1.85, bracketMin: [2, 2.5], knownSource: 'lab' });
    // the early call at spectrum 3 lies before the bracket (4, 5]: provably early
    expect(c.rows[0]!.withinBracket).toBe(false);
    expect(c).toMatchObject({ early: 1, withinBracketCount: 0, earlyWithinBracket: 0, earlyMaxIntervals: 2, earlyMaxMinutes: 1, late: 1, onTime: 1, notReached: 1, noEndpoint: 1, medianIntervals: 0 });
    expect(earlyBatchesText(c)).toBe('the rule reached done before the known endpoint on 1 of 5 reference batches: "early" 2 intervals (1.0 min) early (at or before its lab bracket 2.0–2.5 min began)');
    expect(c.method).toMatch(/^leave-one-batch-out replay through the endpoint tracker/);
  });
});

describe('the leave-one-batch-out check agrees with the live monitor of a model built without the batch', () => {
  const sim = simulateReferenceSet('dryer', 5, 303, { intervalS: 30 });
  // lab values every 6th spectrum (offset per batch), as a site has them
  const refs: ReferenceBatch[] = sim.map((b, bi) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: Array.from(b.truth.property.values, (v, i) => ((i + bi) % 6 === 0 ? v : NaN)) }));
  const settings = {
    name: 'lobo', product: 'p', author: 't', createdAt: 0, components: 3, chain: [{ step: 'scale', center: true, scaling: 'none' }],
    property: { name: 'moisture', unit: '% w/w', components: 3, target: 2, direction: 'below' },
    // The check replays the rule and its minimum time; the run-time guards (standing alarms, a
    // prediction outside calibration) can only delay 'done', so they are off here to compare like with like.
    endpoint: { criteria: [{ kind: 'property', margin: 0.05 }, { kind: 'mbsd', block: 4, threshold: 'auto' }], combine: 'any', confirm: 2, nearingMin: 5, minElapsedMin: 'auto', hold: { alarms: false, extrapolation: false } },
  };
  const model = buildMonitoringModel(refs, settings);
  const check = model.meta.endpointCheck!;
  it('stores one row per reference batch with the known endpoint from the lab values, and round-trips in the file', () => {
    expect(check.rows.map((r) => r.batch)).toEqual(refs.map((b) => b.id));
    check.rows.forEach((r, bi) => {
      expect(r.knownIndex).toBe(model.meta.referenceEndpoints![bi]!.index);
      expect(r.knownSource).toBe('lab');
    });
    expect(parseMonitoringModel(serializeMonitoringModel(model)).meta.endpointCheck).toEqual(check);
    // every batch reaches done somewhere near its endpoint (the comparison below is not about nulls)
    for (const r of check.rows) {
      expect(r.firedIndex).not.toBeNull();
      expect(Math.abs(r.intervals!)).toBeLessThan(40);
    }
  });
  it.each(refs.map((b, bi) => [b.id, bi] as const))('batch %s: same spectrum as the monitor of a model without it', (_id, bi) => {
    const others = refs.filter((_, j) => j !== bi);
    const m = buildMonitoringModel(others, settings);
    const b = refs[bi]!;
    const mon = createBatchMonitor(m, b.times[0]!);
    let done: number | null = null;
    for (let i = 0; i < b.spectra.length && done === null; i++) {
      const r = mon.push(i, b.times[i]!, b.spectra[i]!);
      if (r.endpoint.state === 'done') done = i;
    }
    expect(check.rows[bi]!.firedIndex).toBe(done);
  }, 60_000);
});

describe('a reference batch without a known endpoint is still judged by its lab values', () => {
  // A site's reference batch can end with its last lab result still above the target (the dryer was
  // stopped for another reason, or the final result was never taken): it has no known endpoint,
  // but a call before that result is early all the same — worked by hand here.
  const spec = validateEndpointRuleSpec({ criteria: [{ kind: 'property', target: 2, margin: 0.1 }], combine: 'all', confirm: 2, nearingMin: 5 });
  const property = { name: 'moisture', unit: '% w/w', target: 2, direction: 'below' as const, rmsecv: null };
  const wet = { ...handBatch('wet-at-lab', [5, 1.8, 1.8, 1.7, 1.6, 1.5], null), notBefore: { index: 4, min: 2, text: 'lab moisture 2.30 % w/w at 1.5 min, not yet past the 2.00 % w/w target' } };
  const after = { ...handBatch('after-lab', [5, 1.8, 1.8, 1.7], null), notBefore: { index: 2, min: 1, text: 'lab moisture 2.10 % w/w at 0.5 min, not yet past the 2.00 % w/w target' } };
  const c = checkEndpointRule(spec, [wet, after], endValuesOf(spec, [wet, after], ['wet-at-lab', 'after-lab']), { A: 1, confidence: 0.99, property });
  it('counts a call before the last lab value not yet past the target as early, from the spectrum after it', () => {
    // done at spectrum 2 (1.8, 1.8); the endpoint is not before spectrum 4 (1 min later)
    expect(c.rows[0]).toMatchObject({ verdict: 'early', firedIndex: 2, intervals: -2, minutes: -1, knownIndex: null, notBefore: wet.notBefore });
    // done at spectrum 2, which is where the endpoint may be: not judged
    expect(c.rows[1]).toMatchObject({ verdict: 'no known endpoint', firedIndex: 2, intervals: null });
    expect(c).toMatchObject({ early: 1, earlyMaxIntervals: 2, earlyMaxMinutes: 1, noEndpoint: 1, medianIntervals: null });
    expect(earlyBatchesText(c)).toBe('the rule reached done before the known endpoint on 1 of 2 reference batches: "wet-at-lab" at least 2 intervals (1.0 min) early (no known endpoint, but done before its lab moisture 2.30 % w/w at 1.5 min, not yet past the 2.00 % w/w target)');
  });

  it('in a build: the batch whose last lab result is still wet makes the rule early, so approval needs an override', () => {
    const sim = simulateReferenceSet('dryer', 5, 303, { intervalS: 30 });
    const refs: ReferenceBatch[] = sim.map((b, bi) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: Array.from(b.truth.property.values, (v, i) => ((i + bi) % 6 === 0 ? v : NaN)) }));
    // batch 0: lab values only while it was wet, and a last one — still 2.4 % w/w — at its last spectrum
    const last = refs[0]!.times.length - 1;
    refs[0] = { ...refs[0]!, property: Array.from(refs[0]!.property!, (v, i) => (i === last ? 2.4 : v > 2.5 ? v : NaN)) };
    const settings = {
      name: 'wet-lab', product: 'p', author: 't', createdAt: 0, components: 3, chain: [{ step: 'scale', center: true, scaling: 'none' }],
      property: { name: 'moisture', unit: '% w/w', components: 3, target: 2, direction: 'below' },
      endpoint: { criteria: [{ kind: 'property', margin: 0.05 }], combine: 'all', confirm: 2, nearingMin: 5 },
    };
    const model = buildMonitoringModel(refs, settings);
    const row = model.meta.endpointCheck!.rows[0]!;
    expect(row).toMatchObject({ batch: refs[0]!.id, knownIndex: null, verdict: 'early', notBefore: { index: last + 1 } });
    expect(row.notBefore!.text).toBe(`lab moisture 2.40 % w/w at ${((refs[0]!.times[last]! - refs[0]!.times[0]!) / 60000).toFixed(1)} min, not yet past the 2.00 % w/w target`);
    expect(row.firedIndex).toBeLessThan(last);
    expect(model.meta.endpointCheck!.early).toBeGreaterThanOrEqual(1);
    expect(model.meta.notes!.some((n) => n.startsWith('Endpoint check (leave one batch out): ') && n.includes(`"${refs[0]!.id}" at least`))).toBe(true);
    // the row round-trips in the model file
    expect(parseMonitoringModel(serializeMonitoringModel(model)).meta.endpointCheck).toEqual(model.meta.endpointCheck);
  });
});
