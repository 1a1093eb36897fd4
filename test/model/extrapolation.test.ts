/**
 * The extrapolation flag of the property prediction, calibrated over the whole batch range: the
 * limits are sample quantiles (Hyndman & Fan 1996, Am. Stat. 50:361, type 7 — numpy.quantile's
 * default, checked with numpy at test time) of the PLS X-space T² and Q of every reference spectrum
 * seen by the PLS calibrated without its batch, each at 1 − α/2 (Bonferroni over the two).
 */
import { execFileSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import { sampleQuantile } from '../../core/stats/sample-quantile.ts';
import { extrapolationLimits, fitPropertyModel } from '../../core/model/property-model.ts';
import { buildMonitoringModel, parseMonitoringModel, serializeMonitoringModel } from '../../core/model/monitoring-model.ts';
import { createPrng } from '../../core/stats/prng.ts';
import { simulateReferenceSet } from '../../simulators/batch.ts';

function numpyQuantiles(blocks: { x: number[]; p: number[] }[]): number[][] {
  const code = `
import json, numpy as np
print(json.dumps([[float(v) for v in np.quantile(np.array(b['x']), b['p'])] for b in json.loads(${JSON.stringify(JSON.stringify(blocks))})]))`;
  return JSON.parse(execFileSync('python3', ['-c', code], { encoding: 'utf8' })) as number[][];
}

describe('sampleQuantile (type 7)', () => {
  it('equals numpy.quantile (default linear method)', () => {
    const rng = createPrng(9);
    const blocks = [
      { x: [3, 1, 2], p: [0, 0.25, 0.5, 0.9, 1] },
      { x: Array.from({ length: 101 }, () => rng.normal() ** 2), p: [0.5, 0.95, 0.995] },
      { x: Array.from({ length: 1000 }, () => Math.exp(rng.normal())), p: [0.01, 0.99, 0.9995] },
    ];
    const ref = numpyQuantiles(blocks);
    blocks.forEach((b, i) => b.p.forEach((p, j) => expect(Math.abs(sampleQuantile(b.x, p) - ref[i]![j]!)).toBeLessThanOrEqual(1e-12 * Math.max(1, Math.abs(ref[i]![j]!)))));
  });
  it('names bad input', () => {
    expect(() => sampleQuantile([], 0.5)).toThrow(/no values/);
    expect(() => sampleQuantile([1], 1.5)).toThrow(/p = 1\.5/);
    expect(() => sampleQuantile([1, NaN], 0.5)).toThrow(/value 1 is NaN/);
  });
});

describe('extrapolation limits over the whole batch range', () => {
  const sim = simulateReferenceSet('dryer', 6, 515, { intervalS: 10 });
  const rows = sim.flatMap((b) => b.spectra);
  // lab values every 10th spectrum, and only below 4 % w/w: a local calibration near the endpoint
  const y = sim.flatMap((b) => Array.from(b.truth.property.values, (v, i) => (i % 10 === 0 ? v : NaN)));
  const batchOfRow = sim.flatMap((b, bi) => b.spectra.map(() => bi));
  const spec = { name: 'moisture', unit: '% w/w', components: 3, range: [0, 4] as [number, number], extrapolationConfidence: 0.99 };
  const fit = fitPropertyModel({ axis: sim[0]!.axis, rows, y, batchOfRow, batchIds: sim.map((b) => b.id) }, spec, [{ step: 'scale', center: true, scaling: 'none' }]);
  it('limits are the 99.5 % quantiles (numpy) of the batch-left-out T² and Q of all reference spectra, not only the lab rows', () => {
    const [ref, refQ] = numpyQuantiles([{ x: Array.from(fit.cvAll.t2), p: [0.995] }, { x: Array.from(fit.cvAll.q), p: [0.995] }]);
    expect(fit.cvAll.t2.length).toBe(rows.length);
    const lim = fit.model.limits;
    expect(lim).toMatchObject({ confidence: 0.99, t2Method: 't2-cv-quantile', qMethod: 'q-cv-quantile' });
    expect(Math.abs(lim.t2Limit / ref![0]! - 1)).toBeLessThan(1e-12);
    expect(Math.abs(lim.qLimit / refQ![0]! - 1)).toBeLessThan(1e-12);
    const ev = fit.model.evidence!.extrapolation!;
    expect(ev).toMatchObject({ confidence: 0.99, perStatistic: 0.995, nSpectra: rows.length, t2Limit: lim.t2Limit, qLimit: lim.qLimit });
    expect(ev.method).toMatch(/99\.5 % sample quantile \(Hyndman & Fan 1996, type 7\)/);
  });
  it('on the reference spectra themselves (batch left out) the flag fires on at most about 1 %', () => {
    let n = 0;
    for (let i = 0; i < rows.length; i++) if (fit.cvAll.t2[i]! > fit.model.limits.t2Limit || fit.cvAll.q[i]! > fit.model.limits.qLimit) n++;
    expect(n / rows.length).toBeLessThanOrEqual(0.01);
    expect(n / rows.length).toBeGreaterThan(0.005);
  });
  it('the prediction is flagged exactly when its T² or Q is beyond its limit', () => {
    const lim = fit.model.limits;
    for (const x of rows.filter((_, i) => i % 7 === 0)) {
      const r = fit.model.predict(x);
      expect(r.extrapolating).toBe(r.t2 > lim.t2Limit || r.q > lim.qLimit);
    }
    // a wrong material: the spectrum shifted and tilted well beyond the reference batches
    const odd = Float64Array.from(rows[100]!, (v, j) => v * 1.3 + 0.02 * j / rows[100]!.length);
    expect(fit.model.predict(odd).extrapolating).toBe(true);
  });
  it('with fewer than 10 spectra expected beyond a limit: g·χ²_h matched to the moments (scipy), and says so', () => {
    const rng = createPrng(4);
    const t2 = Array.from({ length: 500 }, () => rng.normal() ** 2 + rng.normal() ** 2);
    const q = Array.from({ length: 500 }, () => 0.1 * Math.exp(rng.normal()));
    const r = extrapolationLimits(t2, q, 0.99);
    const code = `
import json, numpy as np
from scipy import stats
def lim(x):
    x = np.array(x); m, v = x.mean(), x.var(ddof=1)
    return float(v/(2*m) * stats.chi2.ppf(0.995, 2*m*m/v))
print(json.dumps([lim(${JSON.stringify(t2)}), lim(${JSON.stringify(q)})]))`;
    const [lt2, lq] = JSON.parse(execFileSync('python3', ['-c', code], { encoding: 'utf8' })) as number[];
    expect(Math.abs(r.t2Limit / lt2! - 1)).toBeLessThan(1e-9);
    expect(Math.abs(r.qLimit / lq! - 1)).toBeLessThan(1e-9);
    expect(r.method).toMatch(/g·χ²_h at 99\.5 % matched to the mean and variance .* too few spectra for an empirical 99\.5 % quantile \(at least 2000 give 10 beyond it\)/);
    // 2000 values: the empirical quantile
    expect(extrapolationLimits(new Float64Array(2000).map((_, i) => i), new Float64Array(2000).map((_, i) => i), 0.99).t2Limit).toBeCloseTo(0.995 * 1999, 9);
    expect(() => extrapolationLimits([1], [1], 1)).toThrow(/must lie in \(0\.5, 1\)/);
  });
  it('the model file keeps the limits and their method; a build takes the model confidence by default', () => {
    const m = buildMonitoringModel(
      sim.map((b, bi) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: y.slice(batchOfRow.indexOf(bi), batchOfRow.lastIndexOf(bi) + 1) })),
      { name: 'x', product: 'p', author: 't', createdAt: 0, components: 3, confidence: 0.95, property: { name: 'moisture', unit: '% w/w', components: 3, target: 2, range: [0, 4] }, endpoint: { criteria: [{ kind: 'property' }], combine: 'all', confirm: 2, nearingMin: 5 } },
    );
    expect(m.pls!.limits.confidence).toBe(0.95);
    expect(m.pls!.evidence!.extrapolation!.perStatistic).toBeCloseTo(0.975, 12);
    const back = parseMonitoringModel(serializeMonitoringModel(m));
    expect(back.pls!.limits).toEqual(m.pls!.limits);
    expect(back.pls!.evidence!.extrapolation).toEqual(m.pls!.evidence!.extrapolation);
  });
});
