import { describe, expect, it } from 'vitest';
import {
  combinedIndexLimit,
  combinedIndexParameters,
  jacksonMudholkarH0,
  qLimit,
  qLimitBox,
  qLimitBoxMoments,
  qLimitJacksonMudholkar,
  qMoments,
  t2Limit,
  t2LimitCalibration,
  t2LimitChi2,
  t2LimitNew,
} from '../../core/limits/index.ts';
import { scipyNamed } from './scipy.ts';

const MOMENT_Q = [1.2, 0.8, 2.3, 1.1, 0.95, 1.6, 0.7, 1.9, 1.3, 1.05, 0.88, 1.44];
// All scipy reference values of this file, computed in one python3 process at test time.
const REF = scipyNamed({
  t2: `
A, n = 7, 45
out = []
for c in (0.95, 0.99, 0.999):
    out.append(A*(n-1)*(n+1)/(n*(n-A)) * stats.f.ppf(c, A, n-A))
    out.append((n-1)**2/n * stats.beta.ppf(c, A/2, (n-A-1)/2))
print(json.dumps(out))`,
  jmbox: `
lam = np.array([2.1, 1.3, 0.9, 0.4, 0.33, 0.2, 0.07, 0.01])
t1, t2, t3 = (lam**1).sum(), (lam**2).sum(), (lam**3).sum()
h0 = 1 - 2*t1*t3/(3*t2**2)
out = []
for c in (0.95, 0.99, 0.999):
    z = stats.norm.ppf(c)
    out.append(t1*(z*np.sqrt(2*t2*h0**2)/t1 + 1 + t2*h0*(h0-1)/t1**2)**(1/h0))
    out.append(t2/t1 * stats.chi2.ppf(c, t1**2/t2))
print(json.dumps(out))`,
  moments: `
q = np.array(${JSON.stringify(MOMENT_Q)})
m, v = q.mean(), q.var(ddof=1)
print(json.dumps([v/(2*m) * stats.chi2.ppf(c, 2*m*m/v) for c in (0.95, 0.99, 0.999)]))`,
  combined: `
A, t1, t2, tau2, d2 = 4, 3.1, 1.7, 11.0, 6.5
num = A/tau2**2 + t2/d2**2; den = A/tau2 + t1/d2
print(json.dumps([num/den * stats.chi2.ppf(0.99, den**2/num)]))`,
});

const close = (a: number, b: number, tol: number): void => expect(Math.abs(a - b)).toBeLessThanOrEqual(tol);

describe('Hotelling T² limits', () => {
  // Tracy, Young & Mason 1992 formulas; values from docs/check-values.md (computed with scipy), 4 decimals.
  const cases: [number, number, number, number, number, number][] = [
    [2, 20, 0.95, 7.8793, 5.3614, 5.9915],
    [2, 20, 0.99, 13.3286, 7.5502, 9.2103],
    [3, 30, 0.95, 9.8569, 7.1641, 7.8147],
    [3, 30, 0.99, 15.3193, 9.7704, 11.3449],
    [5, 100, 0.95, 12.1579, 10.7302, 11.0705],
  ];
  it.each(cases)('A=%d, n=%d, conf %d: worked values of docs/check-values.md', (A, n, c, fNew, beta, chi2) => {
    close(t2LimitNew(A, n, c), fNew, 5e-5);
    close(t2LimitCalibration(A, n, c), beta, 5e-5);
    close(t2LimitChi2(A, c), chi2, 5e-5);
  });
  it('matches scipy at test time to 1e-9 relative', () => {
    const ref = REF.t2!;
    let i = 0;
    for (const c of [0.95, 0.99, 0.999]) {
      expect(Math.abs(t2LimitNew(7, 45, c) / ref[i++]! - 1)).toBeLessThan(1e-9);
      expect(Math.abs(t2LimitCalibration(7, 45, c) / ref[i++]! - 1)).toBeLessThan(1e-9);
    }
  });
  it('records the method and refuses impossible arguments', () => {
    const l = t2Limit('t2-f-new', 2, 20, 0.95);
    expect(l.method).toBe('t2-f-new');
    expect(l.reference).toMatch(/Tracy, Young & Mason 1992/);
    close(l.value, 7.8793, 5e-5);
    expect(() => t2LimitNew(5, 5, 0.95)).toThrow(/n = 5/);
    expect(() => t2LimitCalibration(2, 20, 1.5)).toThrow(/confidence 1.5/);
    expect(() => t2LimitNew(0, 20, 0.95)).toThrow(/A = 0/);
  });
});

describe('Q limits', () => {
  // Worked case (docs/check-values.md): residual eigenvalues [0.8, 0.5, 0.3, 0.2, 0.1, 0.05].
  const lam = [0.8, 0.5, 0.3, 0.2, 0.1, 0.05];
  const theta: [number, number, number] = [1, 2, 3].map((k) => lam.reduce((s, v) => s + v ** k, 0)) as [number, number, number];
  it('θ and h0, g, h of the worked case (docs/check-values.md)', () => {
    close(theta[0], 1.95, 1e-12);
    close(theta[1], 1.0325, 1e-12);
    close(theta[2], 0.673125, 1e-12);
    close(jacksonMudholkarH0(theta), 0.179159, 5e-7);
    close(theta[1] / theta[0], 0.529487, 5e-7);
    close(theta[0] ** 2 / theta[1], 3.682809, 5e-7);
  });
  it('Jackson & Mudholkar 1979 and Box 1954 on the worked case (docs/check-values.md, 4 decimals)', () => {
    close(qLimitJacksonMudholkar(theta, 0.95), 4.848, 5e-5);
    close(qLimitJacksonMudholkar(theta, 0.99), 7.313, 5e-5);
    close(qLimitBox(theta[0], theta[1], 0.95), 4.7488, 5e-5);
    close(qLimitBox(theta[0], theta[1], 0.99), 6.7138, 5e-5);
  });
  it('Box is exact for ten equal eigenvalues of 0.1 (docs/check-values.md: 1.83070, 2.32093)', () => {
    close(qLimitBox(1, 0.1, 0.95), 1.8307, 5e-6);
    close(qLimitBox(1, 0.1, 0.99), 2.32093, 5e-6);
  });
  it('moment form on the Q values of docs/check-values.md', () => {
    const q = [0.52, 0.61, 0.48, 0.75, 0.9, 0.4, 0.66, 0.58, 0.71, 0.55];
    const { mean, variance } = qMoments(q);
    close(mean, 0.616, 1e-12);
    close(variance, 0.021049, 5e-7);
    close(qLimitBoxMoments(q, 0.95), 0.872433, 5e-7);
    close(qLimitBoxMoments(q, 0.99), 1.00271, 5e-7);
  });
  it('JM and Box match the same formulas evaluated with scipy at test time', () => {
    const ref = REF.jmbox!;
    const l = [2.1, 1.3, 0.9, 0.4, 0.33, 0.2, 0.07, 0.01];
    const th = [1, 2, 3].map((k) => l.reduce((s, v) => s + v ** k, 0)) as [number, number, number];
    let i = 0;
    for (const c of [0.95, 0.99, 0.999]) {
      expect(Math.abs(qLimitJacksonMudholkar(th, c) / ref[i++]! - 1)).toBeLessThan(1e-9);
      expect(Math.abs(qLimitBox(th[0], th[1], c) / ref[i++]! - 1)).toBeLessThan(1e-9);
    }
  });
  it('moment form matches g·χ²_h with scipy (ddof = 1) at test time', () => {
    const q = MOMENT_Q;
    const ref = REF.moments!;
    [0.95, 0.99, 0.999].forEach((c, i) => expect(Math.abs(qLimitBoxMoments(q, c) / ref[i]! - 1)).toBeLessThan(1e-9));
  });
  it('JM refuses h0 ≤ 0 with a message naming Box as the way out', () => {
    // one dominant discarded eigenvalue and many tiny ones: θ1θ3 > 1.5θ2²
    const l = [10, ...Array(200).fill(0.5)];
    const th = [1, 2, 3].map((k) => l.reduce((s, v) => s + v ** k, 0)) as [number, number, number];
    expect(jacksonMudholkarH0(th)).toBeLessThan(0);
    expect(() => qLimitJacksonMudholkar(th, 0.99)).toThrow(/h0 .* ≤ 0.*Box/);
  });
  it('Limit records carry the method', () => {
    expect(qLimit('q-box', { theta }, 0.95).method).toBe('q-box');
    expect(qLimit('q-jackson-mudholkar', { theta }, 0.95).reference).toMatch(/Jackson & Mudholkar 1979/);
    expect(() => qLimit('q-box-moments', { theta }, 0.95)).toThrow(/reference Q values/);
    expect(() => qLimitBoxMoments([0.3], 0.95)).toThrow(/at least 2/);
  });
});

describe('combined index (Yue & Qin 2001)', () => {
  it('worked case: retained [4, 2, 1], residual as above, α = 0.05', () => {
    const lam = [0.8, 0.5, 0.3, 0.2, 0.1, 0.05];
    const theta = [1, 2, 3].map((k) => lam.reduce((s, v) => s + v ** k, 0)) as [number, number, number];
    const tau2 = t2LimitChi2(3, 0.95);
    const delta2 = qLimitJacksonMudholkar(theta, 0.95);
    close(tau2, 7.8147, 5e-5);
    close(delta2, 4.848, 5e-5);
    const { g, h } = combinedIndexParameters(3, theta, tau2, delta2);
    close(g, 0.118372, 5e-6);
    close(h, 6.641083, 5e-5);
    close(combinedIndexLimit(3, theta, tau2, delta2, 0.95), 1.603, 5e-4);
  });
  it('matches the formula evaluated with scipy at test time', () => {
    const ref = REF.combined!;
    expect(Math.abs(combinedIndexLimit(4, [3.1, 1.7, 1], 11, 6.5, 0.99) / ref[0]! - 1)).toBeLessThan(1e-9);
  });
});
