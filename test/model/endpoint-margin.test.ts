/**
 * The automatic margin of the property criterion with the lab method's stated sd
 * (settings.property.labSd): z·√max(RMSECV² − s²_lab, RMSECV²·√(2/n)).
 *
 * Checked against things outside the project:
 * - the decomposition RMSECV² ≈ σ²_prediction + s²_lab for independent errors (DiFoggio 1995,
 *   Appl. Spectrosc. 49:67; Faber & Kowalski 1997, Appl. Spectrosc. 51:660 — both from memory):
 *   numpy draws true values, predictions with error σ_p and lab values with error s_lab, and the
 *   corrected error recovers σ_p within its sampling error;
 * - the floor, one standard error of a mean of n squared normal residuals: RMSECV²·√(2/n), from
 *   scipy's chi-square distribution (sd of χ²_n / n = √(2/n));
 * - z from scipy's normal quantile.
 */
import { execFileSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import { predictionErrorForMargin, resolveCriteria, type EndValues } from '../../core/model/endpoint-calibration.ts';

const py = (code: string) => JSON.parse(execFileSync('python3', ['-c', code], { encoding: 'utf8' })) as number[];

const noEnds: EndValues = { perCriterion: [null], endScores: [], endMin: [], earliestMin: [], batchIds: [] };
const rule = { criteria: [{ kind: 'property' as const, margin: 'auto' as const, marginConfidence: 0.7 }], combine: 'all' as const, confirm: 2, nearingMin: 10 };

describe("the property criterion's automatic margin with a stated lab sd", () => {
  it('takes the lab error out of RMSECV: recovers the prediction error numpy put in', () => {
    // 4000 lab values: prediction error sd 0.05, lab error sd 0.12 (numpy, seeded).
    const [rmsecv, truePred] = py(`
import json, numpy as np
rng = np.random.default_rng(7)
n = 4000
y = rng.uniform(0, 4, n)
pred = y + rng.normal(0, 0.05, n)
lab = y + rng.normal(0, 0.12, n)
print(json.dumps([float(np.sqrt(np.mean((pred - lab) ** 2))), float(np.std(pred - y))]))`);
    const r = predictionErrorForMargin(rmsecv!, 0.12, 4000, '% w/w');
    // sampling error of the corrected variance at n = 4000: a few % of 0.05
    expect(Math.abs(r.sd / truePred! - 1)).toBeLessThan(0.1);
    expect(r.sd).toBeLessThan(rmsecv! / 2);
    expect(r.text).toMatch(/taken out of RMSECV/);
  });

  it('never goes below one standard error of RMSECV² (scipy chi-square: sd of χ²_n/n = √(2/n))', () => {
    const [rel] = py(`
import json
from scipy import stats
n = 73
print(json.dumps([float(stats.chi2(n).std() / n)]))`);
    const rmsecv = 0.148;
    // a stated lab sd as large as RMSECV: the difference is 0, the floor decides
    const r = predictionErrorForMargin(rmsecv, 0.148, 73, '% w/w');
    expect(Math.abs(r.sd ** 2 / (rmsecv ** 2 * rel!) - 1)).toBeLessThan(1e-12);
    expect(r.text).toMatch(/floor/);
    // larger than RMSECV: the same floor, not NaN
    expect(predictionErrorForMargin(rmsecv, 0.3, 73, '% w/w').sd).toBeCloseTo(r.sd, 12);
  });

  it('without a stated lab sd the margin is z·RMSECV as before; with it z·σ, and says how (scipy z)', () => {
    const [z] = py(`
import json
from scipy import stats
print(json.dumps([float(stats.norm.ppf(0.7))]))`);
    const property = { name: 'moisture', unit: '% w/w', target: 2, direction: 'below' as const, rmsecv: 0.148 };
    const before = resolveCriteria(rule, noEnds, { A: 3, confidence: 0.99, property, exclude: null }).criteria[0]!;
    expect(before.kind === 'property' && Math.abs(before.margin! - z! * 0.148)).toBeLessThan(1e-12);
    const after = resolveCriteria(rule, noEnds, { A: 3, confidence: 0.99, property: { ...property, labSd: 0.12, nLab: 73 }, exclude: null }).criteria[0]!;
    if (after.kind !== 'property') throw new Error('kind');
    expect(Math.abs(after.margin! - z! * Math.sqrt(0.148 ** 2 - 0.12 ** 2))).toBeLessThan(1e-12);
    expect(after.marginMethod).toMatch(/^z\(0\.7\)·σ_prediction = 0\.524 × 0\.0866 % w\/w .*√max\(RMSECV² − s²_lab, RMSECV²·√\(2\/n\)\) = √max\(0\.148² − 0\.120², 0\.0219·√\(2\/73\)\)/);
  });

  it('refuses a lab sd without the count of lab values behind RMSECV', () => {
    expect(() => predictionErrorForMargin(0.1, 0.05, undefined, '% w/w')).toThrow(/number of lab values/);
    expect(() => predictionErrorForMargin(0.1, -1, 20, '% w/w')).toThrow(/≥ 0/);
  });
});
