/**
 * The property model at build from sparse lab values (NaN where a spectrum has none): calibrated
 * on the lab rows only, whole batches left out in cross-validation, refused with a sentence naming
 * the property and the batches when there are too few lab values or batches with them. Dense
 * properties (every spectrum) are the special case the evaluation and the demo use.
 */
import { describe, expect, it } from 'vitest';
import { simulateReferenceSet } from '../../simulators/batch.ts';
import { buildMonitoringModel, parseMonitoringModel, serializeMonitoringModel, type ReferenceBatch } from '../../core/model/monitoring-model.ts';
import { fitPropertyModel } from '../../core/model/property-model.ts';

const sim = simulateReferenceSet('dryer', 5, 99);
/** Lab values every `every` spectra (offset by batch), NaN elsewhere; `none` batches get none. */
function sparse(every: number, none: number[] = []): ReferenceBatch[] {
  return sim.map((b, bi) => ({
    id: b.id, axis: b.axis, times: b.times, spectra: b.spectra,
    property: Float64Array.from(b.truth.property.values, (v, i) => (!none.includes(bi) && (i + 5 * bi) % every === 0 ? v : NaN)),
  }));
}
const settings = {
  name: 'sparse', product: 'p', author: 't', createdAt: 0, components: 4,
  chain: [{ step: 'scale', center: true, scaling: 'none' }],
  // centring only: over the whole drying range MSC removes much of the moisture signal (Bogomolov,
  // Mannhardt & Heinzerling 2018); the per-kind defaults use MSC on a local range near the target
  property: { name: 'moisture', unit: '% w/w', components: 'auto' },
  endpoint: { criteria: [{ kind: 'mbsd', block: 5, threshold: 1 }], combine: 'all', confirm: 2, nearingMin: 5 },
};

describe('property model on sparse lab values', () => {
  it('calibrates on the lab rows only with leave-one-batch-out RMSECV and bias; the file round-trips the evidence', () => {
    const batches = sparse(30);
    const labs = batches.reduce((s, b) => s + Array.from(b.property!).filter(Number.isFinite).length, 0);
    const m = buildMonitoringModel(batches, settings);
    const ev = m.pls!.evidence!;
    expect(ev.nLabValues).toBe(labs);
    expect(m.pls!.nCalibration).toBe(labs);
    expect(ev.nBatchesWithLab).toBe(5);
    expect(ev.batchesWithoutLab).toEqual([]);
    expect(ev.cvMethod).toMatch(/leave-one-batch-out: 5 folds/);
    expect(ev.rmsecv.length).toBe(ev.bias.length);
    expect(ev.components).toBe(m.pls!.components);
    expect(ev.rmsecv[ev.components - 1]!).toBeLessThan(ev.rmsecv0);
    // simulated moisture from ~20 % down to ~1.5 %: a usable model predicts to well under 1 % w/w
    expect(ev.rmsecv[ev.components - 1]!).toBeLessThan(0.5);
    expect(ev.labRange[0]).toBeLessThan(ev.labRange[1]);
    const back = parseMonitoringModel(serializeMonitoringModel(m));
    expect(back.pls!.evidence).toEqual(ev);
    expect(back.sha256).toBe(m.sha256);
  });
  it('a batch without lab values is left out of the calibration and named in a note', () => {
    const m = buildMonitoringModel(sparse(30, [2]), settings);
    expect(m.pls!.evidence!.batchesWithoutLab).toEqual([sim[2]!.id]);
    expect(m.pls!.evidence!.cvMethod).toMatch(/4 folds/);
    expect(m.meta.notes).toContainEqual(expect.stringMatching(new RegExp(`no lab values of moisture on 1 reference batch \\(${sim[2]!.id}\\); calibrated on the other 4`)));
  });
  it('refuses, naming the batches, when fewer than 3 batches carry lab values', () => {
    expect(() => buildMonitoringModel(sparse(30, [0, 1, 2]), settings)).toThrow(
      new RegExp(`lab values of moisture \\(% w/w\\) on only 2 reference batches \\(${sim[3]!.id}, ${sim[4]!.id}\\); cross-validation leaves whole batches out and needs lab values on at least 3`),
    );
  });
  it('refuses with fewer than 10 lab values, and when no batch has any', () => {
    expect(() => buildMonitoringModel(sparse(200), settings)).toThrow(/only \d lab values of moisture \(% w\/w\) on the reference batches; at least 10 are needed/);
    const none = sim.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra }));
    expect(() => buildMonitoringModel(none, settings)).toThrow(/none of the 5 reference batches has lab values of moisture/);
  });
  it('a range keeps only lab values within it, and says so when too few remain', () => {
    expect(() => buildMonitoringModel(sparse(30), { ...settings, property: { ...settings.property, range: [0, 1.6] } })).toThrow(/within 0…1\.6 % w\/w/);
  });
  it('a fixed LV count is cross-validated too, and more LVs than can be cross-validated are refused', () => {
    const m = buildMonitoringModel(sparse(30), { ...settings, property: { ...settings.property, components: 3 } });
    expect(m.pls!.components).toBe(3);
    expect(m.pls!.evidence!.rmsecv).toHaveLength(3);
    expect(m.pls!.evidence!.componentsRule).toMatch(/^fixed by the model owner \(3 LV/);
    expect(() => buildMonitoringModel(sparse(30), { ...settings, property: { ...settings.property, components: 30 } })).toThrow(/30 LVs asked; at most \d+ can be cross-validated/);
  });
  it('every reference spectrum is predicted by the model without its batch: on lab rows exactly the CV predictions', () => {
    const batches = sparse(30, [1]);
    const rows = batches.flatMap((b) => b.spectra);
    const y = batches.flatMap((b) => Array.from(b.property!));
    const batchOfRow = batches.flatMap((b, bi) => b.spectra.map(() => bi));
    const fit = fitPropertyModel({ axis: batches[0]!.axis, rows, y, batchOfRow, batchIds: batches.map((b) => b.id) }, { name: 'moisture', unit: '% w/w', components: 'auto' }, settings.chain as never);
    const A = fit.model.components;
    fit.calibrationRows.forEach((i, r) => expect(Math.abs(fit.cvAll.y[i]! - fit.cv.predictions[A - 1]![r]!)).toBeLessThan(1e-9));
    // batch 1 has no lab values: its spectra go through the final model itself
    const i1 = batchOfRow.indexOf(1);
    expect(Math.abs(fit.cvAll.y[i1]! - fit.model.predict(rows[i1]!).y)).toBeLessThan(1e-9);
    expect(Math.abs(fit.cvAll.t2[i1]! - fit.model.predict(rows[i1]!).t2)).toBeLessThan(1e-9 * Math.max(1, fit.cvAll.t2[i1]!));
    expect(Math.abs(fit.cvAll.q[i1]! - fit.model.predict(rows[i1]!).q)).toBeLessThan(1e-9 * Math.max(1, fit.cvAll.q[i1]!));
  });
  it('dense values (every spectrum) are the special case: every spectrum is a lab row', () => {
    const dense = sim.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: b.truth.property.values }));
    const m = buildMonitoringModel(dense, settings);
    expect(m.pls!.evidence!.nLabValues).toBe(sim.reduce((s, b) => s + b.spectra.length, 0));
  });
});
