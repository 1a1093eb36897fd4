/**
 * Statistical check of the limits: on simulated multivariate-normal data with a known low-rank
 * structure plus heteroscedastic noise (seeded PRNG), the false-alarm rate at 99 % of T² (F limit for
 * new observations, Tracy, Young & Mason 1992) and of Q (Jackson & Mudholkar 1979; Box 1954 g·χ²_h)
 * on fresh data lies within the binomial 99.9 % interval around 1 % (interval from scipy.stats.binom).
 */
import { describe, expect, it } from 'vitest';
import { denseMatrix } from '../../core/linalg/dense-matrix.ts';
import { qLimitBox, qLimitJacksonMudholkar, t2LimitNew } from '../../core/limits/index.ts';
import { createProjector, fitPca } from '../../core/pca/index.ts';
import { createPrng } from '../../core/stats/prng.ts';
import { scipyValues } from './scipy.ts';

const p = 40;
const sds = [6, 4, 3];
const A = sds.length;

function simulator(seed: number): (n: number) => ReturnType<typeof denseMatrix> {
  const rng = createPrng(seed);
  const dirs = sds.map(() => Float64Array.from({ length: p }, () => rng.normal()));
  // orthonormalize the directions (Gram–Schmidt) so the structure is exactly rank A
  dirs.forEach((d, a) => {
    for (let b = 0; b < a; b++) {
      let s = 0;
      for (let j = 0; j < p; j++) s += d[j]! * dirs[b]![j]!;
      for (let j = 0; j < p; j++) d[j] -= s * dirs[b]![j]!;
    }
    const nrm = Math.hypot(...d);
    for (let j = 0; j < p; j++) d[j] /= nrm;
  });
  const noiseSd = Float64Array.from({ length: p }, (_, j) => 0.4 + (0.8 * j) / (p - 1)); // 0.4 … 1.2
  const mean = Float64Array.from({ length: p }, () => 3 + rng.normal());
  return (n: number) => {
    const X = denseMatrix(n, p);
    for (let i = 0; i < n; i++) {
      const off = i * p;
      for (let a = 0; a < A; a++) {
        const s = rng.normal() * sds[a]!;
        for (let j = 0; j < p; j++) X.data[off + j] += s * dirs[a]![j]!;
      }
      for (let j = 0; j < p; j++) X.data[off + j] += mean[j]! + noiseSd[j]! * rng.normal();
    }
    return X;
  };
}

describe('false-alarm rate at 99 % on fresh multivariate-normal data', () => {
  it('T² (F) and Q (JM, Box) stay within the binomial 99.9 % interval of 1 %', () => {
    const draw = simulator(20260101);
    const nCal = 2000;
    const nFresh = 20000;
    const model = fitPca(draw(nCal), { components: A });
    const conf = 0.99;
    const t2Lim = t2LimitNew(A, nCal, conf);
    const qJM = qLimitJacksonMudholkar(model.residualTheta, conf);
    const qBox = qLimitBox(model.residualTheta[0], model.residualTheta[1], conf);
    const fresh = draw(nFresh);
    const pr = createProjector(model);
    let overT2 = 0;
    let overJM = 0;
    let overBox = 0;
    for (let i = 0; i < nFresh; i++) {
      const r = pr.project(fresh.data.subarray(i * p, (i + 1) * p));
      if (r.t2 > t2Lim) overT2++;
      if (r.q > qJM) overJM++;
      if (r.q > qBox) overBox++;
    }
    console.info(`false alarms at 99 % over ${nFresh} fresh rows: T² ${overT2}, Q JM ${overJM}, Q Box ${overBox}`);
    const [lo, hi] = scipyValues(`print(json.dumps(list(map(float, stats.binom.interval(0.999, ${nFresh}, 0.01)))))`);
    for (const [name, count] of [['T²', overT2], ['Q JM', overJM], ['Q Box', overBox]] as const) {
      expect(count, `${name}: ${count} of ${nFresh} over the 99 % limit; interval [${lo}, ${hi}]`).toBeGreaterThanOrEqual(lo!);
      expect(count, `${name}: ${count} of ${nFresh} over the 99 % limit; interval [${lo}, ${hi}]`).toBeLessThanOrEqual(hi!);
    }
  });
  it('and the same check can fail: a limit at 95 % gives about 5 % alarms, far outside the 1 % interval', () => {
    const draw = simulator(7);
    const model = fitPca(draw(2000), { components: A });
    const q95 = qLimitJacksonMudholkar(model.residualTheta, 0.95);
    const fresh = draw(5000);
    const pr = createProjector(model);
    let over = 0;
    for (let i = 0; i < 5000; i++) if (pr.project(fresh.data.subarray(i * p, (i + 1) * p)).q > q95) over++;
    expect(over / 5000).toBeGreaterThan(0.035);
    expect(over / 5000).toBeLessThan(0.065);
  });
});
