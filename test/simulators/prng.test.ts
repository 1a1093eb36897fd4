import { beforeAll, describe, expect, it } from 'vitest';
import { deriveSeed, Rng } from '../../simulators/prng.ts';
import { runPython } from './python.ts';

describe('seeded PRNG (xoshiro128** + Box–Muller)', () => {
  it('reproduces the reference xoshiro128** output for state {0, 1, 2, 3}', () => {
    // Output of the reference C code (Blackman & Vigna, prng.di.unimi.it/xoshiro128starstar.c)
    // with s = {0, 1, 2, 3}, as reproduced in public test suites of ports of that code.
    const expected = [
      5760, 17280, 2966400, 32451840, 2604340873, 3891234569, 1254043636, 216095511, 3291724652, 2070429911, 3403762308,
      371730125, 2871333640, 1107719891, 407174912, 2984142590, 3931454317, 988064505, 139866493, 1642526786,
    ];
    const r = Rng.fromState(0, 1, 2, 3);
    expect(expected.map(() => r.nextUint32())).toEqual(expected);
  });

  it('is deterministic by seed; different seeds and derived streams differ', () => {
    const a = new Rng(7);
    const b = new Rng(7);
    const xs = Array.from({ length: 50 }, () => a.uniform());
    expect(Array.from({ length: 50 }, () => b.uniform())).toEqual(xs);
    const c = new Rng(8);
    expect(Array.from({ length: 50 }, () => c.uniform())).not.toEqual(xs);
    expect(deriveSeed(7, 'detector')).not.toBe(deriveSeed(7, 'jitter'));
    expect(new Rng(7).derive('x').uniform()).toBe(new Rng(7).derive('x').uniform());
  });

  // One python3 run for the three distribution checks (scipy.stats.kstest).
  const uniform = (() => {
    const r = new Rng(12345);
    return Array.from({ length: 20000 }, () => r.uniform());
  })();
  const gauss = (() => {
    const r = new Rng(2024);
    return Array.from({ length: 20000 }, () => r.gauss());
  })();
  const skewed = gauss.map((x) => Math.abs(x) - 0.8);
  let ks: { uniform: number; gauss: number; skewed: number; mean: number; sd: number };
  beforeAll(() => {
    ks = runPython(
      'import json,sys; import numpy as np; from scipy import stats; d=json.load(sys.stdin); g=np.array(d["g"])\n' +
        'print(json.dumps({"uniform": float(stats.kstest(d["u"], "uniform").pvalue), "gauss": float(stats.kstest(g, "norm").pvalue),' +
        ' "skewed": float(stats.kstest(d["s"], "norm").pvalue), "mean": float(g.mean()), "sd": float(g.std(ddof=1))}))',
      { u: uniform, g: gauss, s: skewed },
    );
  }, 300_000);

  it('uniform draws lie in [0, 1) and pass a Kolmogorov–Smirnov test (scipy)', () => {
    expect(Math.min(...uniform)).toBeGreaterThanOrEqual(0);
    expect(Math.max(...uniform)).toBeLessThan(1);
    expect(ks.uniform).toBeGreaterThan(0.001);
  });

  it('Gaussian draws pass a Kolmogorov–Smirnov test against N(0, 1) (scipy) and have unit moments', () => {
    expect(ks.gauss).toBeGreaterThan(0.001);
    expect(Math.abs(ks.mean)).toBeLessThan(0.03); // 4 standard errors at n = 20000
    expect(Math.abs(ks.sd - 1)).toBeLessThan(0.02);
  });

  it('a skewed transform of the same draws fails the KS check (the check can fail)', () => {
    expect(ks.skewed).toBeLessThan(1e-6);
  });
});
