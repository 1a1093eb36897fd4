import { beforeAll, describe, expect, it } from 'vitest';
import { simulateBatch, simulateReferenceSet, type SimulatedBatch } from '../../simulators/batch.ts';
import { buildMonitoringModel, calibrationDiagnostics, parseMonitoringModel, serializeMonitoringModel, type MonitoringModel } from '../../core/model/monitoring-model.ts';
import { createBatchMonitor, replayBatch } from '../../core/monitor/batch-monitor.ts';
import { compareBatch } from '../../core/compare/compare-batch.ts';
import type { MonitorResult } from '../../core/monitor/types.ts';
import { execFileSync } from 'node:child_process';
import { DRYER_TEST_SETTINGS } from './settings-fixture.ts';

const settings = DRYER_TEST_SETTINGS;

let ref: SimulatedBatch[];
let model: MonitoringModel;
let good: SimulatedBatch;

beforeAll(() => {
  ref = simulateReferenceSet('dryer', 6, 11);
  model = buildMonitoringModel(ref.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: b.truth.property.values })), settings);
  good = simulateBatch('dryer', { seed: 777001 });
}, 120_000);

function run(m: MonitoringModel, b: SimulatedBatch): MonitorResult[] {
  const mon = createBatchMonitor(m, b.times[0]);
  return b.spectra.map((s, i) => mon.push(i, b.times[i], s));
}

describe('monitoring model file', () => {
  it('round-trips through the model file with the same hash and identical monitor results', () => {
    const text = serializeMonitoringModel(model);
    const back = parseMonitoringModel(text);
    expect(back.sha256).toBe(model.sha256);
    expect(back.id).toBe(model.id);
    expect(serializeMonitoringModel(back)).toBe(text);
    const a = run(model, good).slice(0, 80);
    const b = run(back, good).slice(0, 80);
    expect(b).toEqual(a);
  });
  it('refuses a tampered or foreign file with a clear error', () => {
    const text = serializeMonitoringModel(model);
    const obj = JSON.parse(text);
    obj.body.limits.t2.value *= 2;
    expect(() => parseMonitoringModel(JSON.stringify(obj))).toThrow(/hash|sha/i);
    expect(() => parseMonitoringModel('not json')).toThrow(/JSON/i);
    const foreign = JSON.parse(text);
    foreign.format = 'something-else';
    expect(() => parseMonitoringModel(JSON.stringify(foreign))).toThrow(/format/i);
  });
  it('builds from minimal settings with the defaults (no property: MBSD endpoint, auto threshold at marked endpoints)', () => {
    const plain = ref.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra }));
    // no lab values and no marks: the auto threshold has no endpoint to calibrate at
    expect(() => buildMonitoringModel(plain, { name: 'n', product: 'p', author: 'a', createdAt: 0 })).toThrow(/moving-block SD threshold 'auto' on the reference batches' known endpoints, and \d+ reference batches have none/);
    const marks = ref.map((b) => ({ batch: b.id, index: b.truth.endpointIndex! }));
    const m = buildMonitoringModel(plain, { name: 'n', product: 'p', author: 'a', createdAt: 0, alarms: { onDelay: 2 }, referenceEndpoints: marks });
    expect(m.pca.nComponents).toBe(3);
    expect(m.settings.alarms).toEqual({ onDelay: 2, onWindow: 5, offDelay: 5, deadband: 0.05, limits: 'local', startupMin: 2 });
    expect(m.endpoint.criteria[0]).toMatchObject({ kind: 'mbsd', block: 5 });
    expect(m.pls).toBeUndefined();
    const r = run(m, good);
    // the rule is met and confirmed; this batch carries a standing envelope alarm from early on,
    // so the endpoint is held by it (not done) — and with the alarm hold off it is done
    const held = r.filter((x) => x.endpoint.state === 'held');
    expect(held.length).toBeGreaterThan(0);
    for (const x of held) {
      expect(x.endpoint.holds!.map((h) => h.code)).toEqual(['alarm']);
      expect(x.activeConditions.length).toBeGreaterThan(0);
    }
    expect(r.some((x) => x.endpoint.state === 'done')).toBe(false);
    const open = buildMonitoringModel(plain, { name: 'n', product: 'p', author: 'a', createdAt: 0, alarms: { onDelay: 2 }, referenceEndpoints: marks, endpoint: { criteria: [{ kind: 'mbsd', block: 5, threshold: 'auto' }], combine: 'all', confirm: 3, nearingMin: 5, hold: { alarms: false } } });
    expect(run(open, good).some((x) => x.endpoint.state === 'done')).toBe(true);
    expect(r[0].prediction).toBeNull();
  });
  it("the 'prediction' band uses t(1 − α/(2A); I − 1)·√(1 + 1/I) (t from scipy at test time)", () => {
    const m = buildMonitoringModel(ref.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: b.truth.property.values })), { ...settings, envelope: { k: 3, smoothing: 2, points: 60, band: 'prediction' } });
    const want = Number(execFileSync('python3', ['-c', 'from scipy.stats import t; import math; print(float(t.ppf(1 - 0.01 / 6, 5) * math.sqrt(1 + 1 / 6)))']).toString());
    expect(m.envelope.k).toBeCloseTo(want, 8);
  });
  it('names bad build input', () => {
    const rb = ref.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: b.truth.property.values }));
    expect(() => buildMonitoringModel(rb.slice(0, 1), settings)).toThrow(/at least 2/);
    expect(() => buildMonitoringModel(rb, { ...settings, confidence: 2 })).toThrow(/confidence/);
    expect(() => buildMonitoringModel([rb[0], { ...rb[1], axis: rb[1].axis.slice(1) }], settings)).toThrow(/wavelengths/);
    expect(() => buildMonitoringModel([rb[0], rb[0]], settings)).toThrow(/twice/);
  });
});

describe('batch monitor', () => {
  it('replaying the stored spectra rebuilds exactly the same results and state', () => {
    const first = run(model, good);
    const { results, monitor } = replayBatch(model, good.times[0], good.spectra.map((values, i) => ({ seq: i, t: good.times[i], values })));
    expect(results).toEqual(first);
    // the rebuilt monitor carries on exactly like an uninterrupted one
    const extraT = good.times[good.times.length - 1] + 10_000;
    const cont = createBatchMonitor(model, good.times[0]);
    good.spectra.forEach((s, i) => cont.push(i, good.times[i], s));
    const last = good.spectra[good.spectra.length - 1];
    expect(monitor.push(good.spectra.length, extraT, last)).toEqual(cont.push(good.spectra.length, extraT, last));
  });
  it('reports progress, envelope, limits and an endpoint on a good batch; signalled only after done', () => {
    const mon = createBatchMonitor(model, good.times[0]);
    expect(mon.markSignalled(good.times[0])).toBeNull();
    const rs = good.spectra.map((s, i) => mon.push(i, good.times[i], s));
    const r = rs[50];
    expect(r.scores).toHaveLength(3);
    expect(r.envelope).toHaveLength(3);
    expect(r.localLimits).not.toBeNull();
    expect(r.progressFraction).toBeGreaterThanOrEqual(0);
    expect(rs[rs.length - 1].progressFraction).toBeGreaterThan(rs[10].progressFraction);
    const done = rs.find((x) => x.endpoint.state === 'done');
    expect(done).toBeDefined();
    expect(done!.events.some((e) => e.type === 'endpoint-state' && e.to === 'done')).toBe(true);
    const ev = mon.markSignalled(good.times[good.times.length - 1] + 1000);
    expect(ev).toMatchObject({ type: 'endpoint-state', from: 'done', to: 'signalled' });
    expect(mon.markSignalled(0)).toBeNull();
  });
  it('contributions sum to T² and Q and carry band assignments', () => {
    const mon = createBatchMonitor(model, good.times[0]);
    const r = mon.push(0, good.times[0], good.spectra[100]);
    const c = mon.contributions(good.spectra[100]);
    expect(c.t2.reduce((s, v) => s + v, 0)).toBeCloseTo(r.t2, 8);
    expect(c.q.reduce((s, v) => s + v, 0)).toBeCloseTo(r.q, 8);
    expect(c.regions.some((x) => x.name.startsWith('water'))).toBe(true);
    expect(c.regions.reduce((s, x) => s + x.q, 0)).toBeCloseTo(r.q, 8);
  });
  it('a wrong-material step raises a confirmed alarm within a few spectra; a single spike is only suspect', () => {
    const bad = simulateBatch('dryer', { seed: 777002, faults: [{ type: 'wrong-material', onsetS: 1200 }] });
    const onset = bad.truth.faults[0].onsetIndex;
    const rs = run(model, bad);
    const first = rs.findIndex((r) => r.conditionChanges.some((c) => c.active));
    expect(first).toBeGreaterThanOrEqual(onset);
    expect(first - onset).toBeLessThanOrEqual(10);
    // one spike: copy a good batch and add an offset to one spectrum
    const spiked = good.spectra.map((s) => Float32Array.from(s));
    for (let j = 0; j < spiked[120].length; j++) spiked[120][j] += 0.3;
    const mon = createBatchMonitor(model, good.times[0]);
    const rr = spiked.map((s, i) => mon.push(i, good.times[i], s));
    expect(rr[120].suspect).toBe(true);
    expect(rr.slice(118, 130).some((r) => r.conditionChanges.some((c) => c.active))).toBe(false);
  });
  it("with alarms.limits 'global' the T²/Q conditions use the global limits and the combined index raises too", () => {
    const m = buildMonitoringModel(ref.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: b.truth.property.values })), { ...settings, alarms: { ...settings.alarms, limits: 'global' } });
    const bad = simulateBatch('dryer', { seed: 777002, faults: [{ type: 'wrong-material', onsetS: 1200 }] });
    const changes = run(m, bad).flatMap((r) => r.conditionChanges);
    const q = changes.find((c) => c.key === 'q' && c.active);
    expect(q?.limit).toBe(m.limits.q.value);
    expect(changes.some((c) => c.key === 'combined' && c.active)).toBe(true);
    // per-point limits (the default) never raise a 'combined' condition
    expect(run(model, bad).flatMap((r) => r.conditionChanges).some((c) => c.key === 'combined')).toBe(false);
  });
  it('an envelope alarm stands, never cleared "back within limits", while the batch runs past the golden course; no infinite sd', () => {
    // Time axis: past the shortest reference batches too few golden batches remain to judge the
    // envelope, and past the longest their spread is unknown (one batch, sd 0).
    const timeModel = buildMonitoringModel(
      ref.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: b.truth.property.values })),
      { ...settings, progress: { kind: 'time' }, endpoint: { criteria: [{ kind: 'mbsd', block: 5, threshold: 'auto' }], combine: 'any', confirm: 3, nearingMin: 10 } },
    );
    const bad = simulateBatch('dryer', { seed: 777002, faults: [{ type: 'wrong-material', onsetS: 1200 }] });
    const mon = createBatchMonitor(timeModel, bad.times[0]);
    const dt = bad.times[1] - bad.times[0];
    const n = bad.spectra.length;
    // the operator stops late: the last spectrum repeats for 200 more intervals
    const rs = Array.from({ length: n + 200 }, (_, i) => mon.push(i, bad.times[0] + i * dt, bad.spectra[Math.min(i, n - 1)]));
    const k = timeModel.alarmLimits?.envelopeK ?? timeModel.envelope.k;
    const longest = Math.max(...ref.map((b) => (b.times[b.times.length - 1] - b.times[0]) / 60000));
    let raisedLate = 0;
    for (const r of rs) {
      for (const c of r.conditionChanges) {
        expect(c.message).not.toMatch(/Infinity|NaN/);
        if (c.kind !== 'envelope' || c.key === 'pace') continue;
        const e = r.envelope[Number(c.key.slice(2)) - 1];
        // a change happens only on a judged point, and a clear only with the score back near the path
        expect(e.status).not.toBe('unjudged');
        if (!c.active) expect(Math.abs(e.sd!)).toBeLessThan(k);
        else if (r.elapsedMin > 50) raisedLate++;
      }
      for (const e of r.envelope) if (e.sd !== null) expect(Number.isFinite(e.sd)).toBe(true);
    }
    const past = rs.filter((r) => r.elapsedMin > longest + 1);
    expect(past.length).toBeGreaterThan(30);
    for (const r of past) for (const e of r.envelope) expect(e.status).toBe('unjudged');
    // an envelope alarm raised late in the batch is still standing at its end
    expect(raisedLate).toBeGreaterThan(0);
    expect(rs[rs.length - 1].activeConditions.some((key) => key.startsWith('pc'))).toBe(true);
  });
  it('the PC that is the progress indicator is never judged against its own envelope', () => {
    const pc1Model = buildMonitoringModel(ref.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra })), { ...settings, property: undefined, progress: { kind: 'indicator', source: 'pc1' }, endpoint: { criteria: [{ kind: 'mbsd', block: 5, threshold: 'auto' }], combine: 'any', confirm: 3, nearingMin: 10 }, referenceEndpoints: ref.map((b) => ({ batch: b.id, index: b.truth.endpointIndex! })) });
    const rs = run(pc1Model, good);
    expect(rs.every((r) => r.envelope[0].status === 'unjudged')).toBe(true);
    expect(rs.some((r) => r.envelope[1].status === 'inside')).toBe(true);
  });
  it('refuses a spectrum of the wrong length, naming the model', () => {
    const mon = createBatchMonitor(model, good.times[0]);
    expect(() => mon.push(0, good.times[0], new Float32Array(5))).toThrow(/5 values.*expects 256/);
  });
});

describe('post-batch comparison and diagnostics', () => {
  it('finds the departure of a faulty batch and the regions behind it', () => {
    // A reference batch with a band added from spectrum 150 on: a Gaussian at 1200 nm (the
    // 'water-1190' region of core/bands), 0.03 absorbance high, 12 nm wide.
    const base = ref[2];
    const onset = 150;
    const spectra = base.spectra.map((s, i) => {
      const x = Float32Array.from(s);
      if (i >= onset) for (let j = 0; j < x.length; j++) x[j] += 0.03 * Math.exp(-0.5 * ((base.axis[j] - 1200) / 12) ** 2);
      return x;
    });
    const cmp = compareBatch(model, { times: base.times, spectra });
    expect(cmp.firstExit).not.toBeNull();
    expect(cmp.firstExit!.index).toBeGreaterThanOrEqual(onset);
    expect(cmp.firstExit!.index - onset).toBeLessThanOrEqual(5);
    expect(cmp.departureWindow!.from).toBe(cmp.firstExit!.index);
    expect(cmp.regions[0].name).toBe('water-1190');
    expect(cmp.topVariables[0].nm).toBeGreaterThan(1170);
    expect(cmp.topVariables[0].nm).toBeLessThan(1230);
    expect(cmp.dtw.path[0]).toEqual([0, 0]);
    expect(cmp.dtw.path[cmp.dtw.path.length - 1]).toEqual([spectra.length - 1, model.envelope.grid.length - 1]);
    expect(cmp.aligned.pcs[0].score).toHaveLength(model.envelope.grid.length);
    const same = compareBatch(model, base);
    expect(same.firstExit).toBeNull();
    // a good batch has no departure window, even with single points outside a 99 % limit
    expect(same.departureWindow).toBeNull();
    expect(same.regions).toEqual([]);
  });
  it('calibration diagnostics for the Model bench', () => {
    const d = calibrationDiagnostics(model);
    expect(d.components).toBe(3);
    expect(d.press.length).toBeGreaterThan(0);
    expect(d.sampleT2).toHaveLength(model.meta.nSpectra);
    expect(d.loadings.pcs).toHaveLength(3);
    expect(d.loadings.axis).toHaveLength(256);
    expect(d.pls?.components).toBe(3);
  });
});
