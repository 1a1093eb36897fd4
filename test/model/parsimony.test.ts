/**
 * The one-standard-error rule (Hastie, Tibshirani & Friedman 2009, The Elements of Statistical
 * Learning, 2nd ed., §7.10): the fewest components whose cross-validated error is within one
 * standard error — sd of the K fold errors / √K — of the least. Held against the same rule written
 * with numpy at test time, and used for PCA components and PLS latent variables at build.
 */
import { execFileSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import { oneStandardErrorRule } from '../../core/model/parsimony.ts';
import { crossValidatePca } from '../../core/pca/index.ts';
import { buildMonitoringModel } from '../../core/model/monitoring-model.ts';
import { createPrng } from '../../core/stats/prng.ts';
import { lowRankData } from '../pca/synthetic.ts';
import { syntheticBatches } from './synthetic-batches.ts';

/** The rule written with numpy, for several tables in one python3 process. */
function numpyRule(tables: { cv: number[]; folds: number[][] }[]): number[] {
  const code = `
import json, numpy as np
out = []
for t in json.loads(${JSON.stringify(JSON.stringify(tables))}):
    cv = np.array(t['cv']); F = np.array(t['folds'])
    best = int(np.argmin(cv))
    se = F[best].std(ddof=1) / np.sqrt(F.shape[1])
    out.append(int(np.nonzero(cv <= cv[best] + se)[0][0]) + 1)
print(json.dumps(out))`;
  return JSON.parse(execFileSync('python3', ['-c', code], { encoding: 'utf8' })) as number[];
}

describe('oneStandardErrorRule', () => {
  it('agrees with numpy on random error tables (fold errors scattered around a falling curve)', () => {
    const rng = createPrng(5);
    const tables = Array.from({ length: 12 }, (_, t) => {
      const A = 4 + (t % 6);
      const K = 5 + t;
      const folds = Array.from({ length: A }, (_, a) => Array.from({ length: K }, () => (1 / (a + 1) + 0.2) * (1 + 0.3 * rng.normal()) ** 2));
      return { cv: folds.map((f) => f.reduce((s, v) => s + v, 0) / K), folds };
    });
    const ref = numpyRule(tables);
    tables.forEach(({ cv, folds }, t) => {
      const r = oneStandardErrorRule(cv, folds, 'LV');
      expect(r.chosen, `table ${t}`).toBe(ref[t]);
      expect(r.chosen).toBeLessThanOrEqual(r.best);
      expect(cv[r.chosen - 1]!).toBeLessThanOrEqual(r.threshold);
    });
    // the tables are not all trivial: the rule chose fewer than the least error somewhere
    expect(tables.some(({ cv, folds }) => oneStandardErrorRule(cv, folds, 'LV').chosen < oneStandardErrorRule(cv, folds, 'LV').best)).toBe(true);
  });
  it('says when the choice or the least error is the largest count searched', () => {
    const falling = [[5, 5.2, 4.8], [3, 3.1, 2.9], [1, 1.01, 0.99]];
    const cv = falling.map((f) => f.reduce((s, v) => s + v, 0) / 3);
    const r = oneStandardErrorRule(cv, falling, 'PC');
    expect(r.chosen).toBe(3);
    expect(r.atLimit).toBe(true);
    expect(r.text).toMatch(/The choice is the largest count searched \(3\)/);
    const flat = [[5, 5, 5], [1, 1.4, 0.6], [0.95, 1.35, 0.55]];
    const r2 = oneStandardErrorRule(flat.map((f) => f.reduce((s, v) => s + v, 0) / 3), flat, 'PC');
    expect(r2.best).toBe(3);
    expect(r2.chosen).toBe(2);
    expect(r2.atLimit).toBe(false);
    expect(r2.bestAtLimit).toBe(true);
    expect(r2.text).toMatch(/least error is at the largest count searched \(3\); the rule chose fewer/);
  });
  it('names bad input', () => {
    expect(() => oneStandardErrorRule([], [], 'LV')).toThrow(/no component count/);
    expect(() => oneStandardErrorRule([1, 2], [[1, 1]], 'LV')).toThrow(/1 rows of fold errors for 2 counts/);
    expect(() => oneStandardErrorRule([1], [[1]], 'LV')).toThrow(/at least 2 folds/);
    expect(() => oneStandardErrorRule([NaN], [[1, 2]], 'LV')).toThrow(/error at 1 LV is NaN/);
  });
});

describe('PCA components at build: the rule over the ekf folds', () => {
  it('the fold parts of PRESS add up to PRESS', () => {
    const { X } = lowRankData(60, 20, [4, 2, 1], 0.3, 3);
    const cv = crossValidatePca(X, 5, { folds: 6 });
    cv.press.forEach((p, a) => expect(cv.foldPress[a]!.reduce((s, v) => s + v, 0)).toBeCloseTo(p, 8));
    expect(cv.foldRows.reduce((s, v) => s + v, 0)).toBe(60);
  });
  it("'auto' takes the one-standard-error choice, states the rule and is not the search maximum on rank-3 data", () => {
    const batches = syntheticBatches(5, 40, 40, [6, 4, 3], 0.3, 21);
    const m = buildMonitoringModel(batches, { name: 'pc', product: 'p', author: 't', createdAt: 0, components: 'auto', endpoint: { criteria: [{ kind: 'mbsd', block: 5, threshold: 1 }], combine: 'all', confirm: 2, nearingMin: 5 } });
    expect(m.pca.nComponents).toBe(m.meta.pcaCv.recommended);
    expect(m.meta.pcaCv.recommended).toBe(3);
    expect(m.meta.pcaCv.atSearchLimit).toBe(false);
    expect(m.meta.pcaCv.rule).toMatch(/^one-standard-error rule .* 3 PC/);
    expect(m.meta.notes ?? []).not.toContainEqual(expect.stringMatching(/PCA components/));
  });
});
