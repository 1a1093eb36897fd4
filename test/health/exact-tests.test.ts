import { describe, expect, it } from 'vitest';
import { binomialTestTwoSided, fisherExactGreater, poissonUpperTail, tInterval } from '../../core/health/exact-tests.ts';
import { DRIFT_CLIP, DRIFT_EWMA, ewmaChart } from '../../core/health/ewma.ts';
import { createPrng } from '../../core/stats/prng.ts';
import { scipyNamed } from '../limits/scipy.ts';

describe('Fisher exact test (one-sided, greater)', () => {
  // k of n window batches leaving a limit against kb of nb baseline batches: the shapes model health uses.
  const cases: [number, number, number, number][] = [[4, 20, 0, 30], [7, 20, 0, 30], [20, 20, 0, 30], [3, 20, 2, 40], [0, 20, 1, 30], [5, 12, 1, 25], [1, 1, 0, 1], [10, 20, 10, 20]];
  it('matches scipy.stats.fisher_exact([[k, n − k], [kb, nb − kb]], alternative="greater").pvalue', () => {
    const ref = scipyNamed(Object.fromEntries(cases.map(([k, n, kb, nb]) => [`${k}/${n}/${kb}/${nb}`, `print(json.dumps([stats.fisher_exact([[${k}, ${n - k}], [${kb}, ${nb - kb}]], alternative='greater').pvalue]))`])));
    for (const [k, n, kb, nb] of cases) {
      const want = ref[`${k}/${n}/${kb}/${nb}`]![0]!;
      expect(Math.abs(fisherExactGreater(k, n, kb, nb) - want)).toBeLessThanOrEqual(1e-12 + 1e-9 * want);
    }
    // A value by hand: 4 of 20 against 0 of 30 is C(20,4)/C(50,4) = 4845/230300.
    expect(fisherExactGreater(4, 20, 0, 30)).toBeCloseTo(4845 / 230300, 14);
  });
  it('names bad arguments', () => {
    expect(() => fisherExactGreater(3, 2, 0, 5)).toThrow(/0 ≤ k ≤ n/);
  });
});

describe('exact binomial test (two-sided)', () => {
  // k, n, p: rates of spectra beyond a 99 % limit, small and large n, both tails, ties of the pmf.
  const cases: [number, number, number][] = [[0, 30, 0.01], [3, 120, 0.01], [12, 400, 0.01], [61, 3000, 0.01], [2, 3000, 0.01], [7, 10, 0.5], [5, 10, 0.5], [40, 20000, 0.001], [1, 1, 0.3]];
  it('matches scipy.stats.binomtest(k, n, p).pvalue', () => {
    const ref = scipyNamed(Object.fromEntries(cases.map(([k, n, p]) => [`${k}/${n}/${p}`, `print(json.dumps([stats.binomtest(${k}, ${n}, ${p}).pvalue]))`])));
    for (const [k, n, p] of cases) {
      const want = ref[`${k}/${n}/${p}`]![0]!;
      const got = binomialTestTwoSided(k, n, p);
      expect(Math.abs(got - want)).toBeLessThanOrEqual(1e-9 + 1e-7 * want);
    }
  });
  it('stays quiet at its nominal rate on good data (Monte Carlo, 4000 draws, seeded)', () => {
    // Independent spectra beyond a 99 % limit with probability 0.01, 600 per window: the exact test
    // is conservative, so at α = 0.01 it rejects at most about 1 % of the time. Tolerance: the
    // binomial 99.9 % upper bound for 4000 draws at 1 % is 1.6 %.
    const rng = createPrng(20261205);
    let rejected = 0;
    for (let r = 0; r < 4000; r++) {
      let k = 0;
      for (let i = 0; i < 600; i++) if (rng.next() < 0.01) k++;
      if (binomialTestTwoSided(k, 600, 0.01) < 0.01) rejected++;
    }
    expect(rejected / 4000).toBeLessThanOrEqual(0.016);
    expect(rejected).toBeGreaterThan(0);
  });
  it('names bad arguments', () => {
    expect(() => binomialTestTwoSided(5, 3, 0.1)).toThrow(/0 ≤ k ≤ n/);
    expect(() => binomialTestTwoSided(1, 3, 1)).toThrow(/strictly between/);
  });
});

describe('Poisson upper tail and t interval', () => {
  it('match scipy.stats.poisson.sf(k − 1, mu) and scipy.stats.t.interval', () => {
    const ref = scipyNamed({
      pois: 'print(json.dumps([float(stats.poisson.sf(k - 1, mu)) for k, mu in [(0, 2.0), (1, 0.5), (4, 1.0), (10, 2.5), (30, 4.0), (3, 7.0)]]))',
      t: 'x = np.array([0.12, -0.05, 0.31, 0.08, 0.22, 0.15, -0.02])\nm = x.mean(); s = stats.sem(x)\nlo, hi = stats.t.interval(0.999, len(x) - 1, loc=m, scale=s)\nprint(json.dumps([m, lo, hi]))',
    });
    const got = [[0, 2.0], [1, 0.5], [4, 1.0], [10, 2.5], [30, 4.0], [3, 7.0]].map(([k, mu]) => poissonUpperTail(k!, mu!));
    got.forEach((g, i) => expect(Math.abs(g - ref.pois![i]!)).toBeLessThanOrEqual(1e-12 + 1e-9 * ref.pois![i]!));
    const t = tInterval([0.12, -0.05, 0.31, 0.08, 0.22, 0.15, -0.02], 0.999);
    expect(t.mean).toBeCloseTo(ref.t![0]!, 12);
    expect(t.interval[0]).toBeCloseTo(ref.t![1]!, 9);
    expect(t.interval[1]).toBeCloseTo(ref.t![2]!, 9);
  });
});

describe('EWMA chart', () => {
  // NIST/SEMATECH e-Handbook of Statistical Methods 6.3.2.4, example: target 50, s = 2.0539, λ = 0.3,
  // L = 3; asymptotic limits 47.4115 and 52.5884 (the handbook's figures, from its table).
  const data = [52.0, 47.0, 53.0, 49.3, 50.1, 47.0, 51.0, 50.1, 51.2, 50.5, 49.6, 47.6, 49.9, 51.3, 47.8, 51.2, 52.6, 52.4, 53.6, 52.1];
  it('reproduces the NIST/SEMATECH example and a numpy recomputation of the exact limits', () => {
    const c = ewmaChart(data, 50, 2.0539, { lambda: 0.3, L: 3 });
    expect(c.upper[data.length - 1]).toBeCloseTo(52.5884, 3);
    expect(c.lower[data.length - 1]).toBeCloseTo(47.4115, 3);
    // The handbook's EWMA values: 50.60 first and 51.99 last (rounded to 2 decimals in its table).
    expect(c.ewma[0]).toBeCloseTo(50.6, 2);
    expect(c.ewma[data.length - 1]).toBeCloseTo(51.99, 1);
    expect(c.firstSignal).toBeNull();
    const ref = scipyNamed({
      ewma: `x = np.array(${JSON.stringify(data)}); lam = 0.3; z = 50.0; out = []\nfor v in x:\n  z = lam * v + (1 - lam) * z; out.append(z)\nprint(json.dumps(out))`,
      h: `lam = 0.3; i = np.arange(1, ${data.length + 1})\nprint(json.dumps((3 * 2.0539 * np.sqrt(lam / (2 - lam) * (1 - (1 - lam) ** (2 * i)))).tolist()))`,
    });
    c.ewma.forEach((v, i) => expect(v).toBeCloseTo(ref.ewma![i]!, 10));
    c.halfWidth.forEach((v, i) => expect(v).toBeCloseTo(ref.h![i]!, 10));
  });
  it('signals a 1.5 σ shift within a few points with the drift design (λ 0.2, L 3, clipped at 1.5 σ)', () => {
    const rng = createPrng(7);
    const x = Array.from({ length: 60 }, (_, i) => rng.normal() + (i >= 30 ? 1.5 : 0));
    const c = ewmaChart(x, 0, 1, DRIFT_EWMA);
    expect(c.firstSignal).not.toBeNull();
    expect(c.firstSignal!).toBeGreaterThanOrEqual(30);
    expect(c.firstSignal!).toBeLessThan(45);
  });
  it('clipped (robust) EWMA: in-control signal rate on N(0,1) sequences at or below the design α, its steps limited to ±k·σ', () => {
    // Design α per point at the asymptotic limits: 2·(1 − Φ(3)) = 0.0027 (standard normal table).
    // Seeded Monte Carlo, 2000 sequences of 200 points (400 000 points; signals come in clusters, so
    // the tolerance is wide): the plain EWMA within ±25 % of α, the clipped one (k = 1.5) at or below
    // the plain one and above α/10 (its limits still mean something: 0.0012 was observed).
    const alpha = 0.0027;
    const rng = createPrng(2024);
    let plain = 0;
    let clipped = 0;
    let points = 0;
    for (let r = 0; r < 2000; r++) {
      const x = Array.from({ length: 200 }, () => rng.normal());
      const p = ewmaChart(x, 0, 1, { lambda: 0.2, L: 3 });
      const c = ewmaChart(x, 0, 1, DRIFT_EWMA);
      for (let i = 0; i < x.length; i++) {
        points++;
        if (Math.abs(p.ewma[i]!) > p.halfWidth[i]!) plain++;
        if (Math.abs(c.ewma[i]!) > c.halfWidth[i]!) clipped++;
      }
    }
    console.log(`in-control signal rate per point: plain ${(plain / points).toFixed(5)}, clipped (k = ${DRIFT_CLIP}) ${(clipped / points).toFixed(5)}, design α ${alpha}`);
    expect(DRIFT_EWMA.clip).toBe(1.5);
    expect(plain / points).toBeGreaterThan(alpha * 0.75);
    expect(plain / points).toBeLessThan(alpha * 1.25);
    expect(clipped).toBeLessThanOrEqual(plain);
    expect(clipped / points).toBeGreaterThan(alpha / 10);
    // One far-off point moves the clipped EWMA by λ·k·σ at most; the plain one by λ times its distance.
    const one = ewmaChart([0, 0, 20, 0], 0, 1, DRIFT_EWMA);
    expect(one.ewma[2]).toBeCloseTo(0.2 * 1.5, 12);
    expect(ewmaChart([0, 0, 20, 0], 0, 1, { lambda: 0.2, L: 3 }).ewma[2]).toBeCloseTo(4, 12);
    // A sustained 1.5 σ shift is still signalled within a few points.
    const rng2 = createPrng(7);
    const x = Array.from({ length: 60 }, (_, i) => rng2.normal() + (i >= 30 ? 1.5 : 0));
    const c = ewmaChart(x, 0, 1, DRIFT_EWMA);
    expect(c.firstSignal).not.toBeNull();
    expect(c.firstSignal!).toBeGreaterThanOrEqual(30);
    expect(c.firstSignal!).toBeLessThan(45);
    expect(() => ewmaChart([1], 0, 1, { lambda: 0.2, L: 3, clip: 0 })).toThrow(/clip/);
  });
  it('names bad designs', () => {
    expect(() => ewmaChart([1], 0, 1, { lambda: 0, L: 3 })).toThrow(/λ/);
    expect(() => ewmaChart([1], 0, 0)).toThrow(/σ/);
  });
});
