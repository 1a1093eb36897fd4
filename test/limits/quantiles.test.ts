import { describe, expect, it } from 'vitest';
import { betaInv, chi2Inv, fInv, normalInv, tInv } from '../../core/stats/quantiles.ts';
import { scipyValues } from './scipy.ts';

// NIST/SEMATECH e-Handbook of Statistical Methods, 1.3.6.7.3 (F) and 1.3.6.7.4 (χ²), three decimals.
const NIST_F: [number, number, number, number][] = [
  [0.95, 1, 10, 4.965], [0.99, 1, 10, 10.044],
  [0.95, 2, 10, 4.103], [0.99, 2, 10, 7.559],
  [0.95, 5, 10, 3.326], [0.99, 5, 10, 5.636],
  [0.95, 3, 20, 3.098], [0.99, 3, 20, 4.938],
  [0.95, 5, 30, 2.534], [0.99, 5, 30, 3.699],
  [0.95, 10, 60, 1.993], [0.99, 10, 60, 2.632],
];
const NIST_CHI2: [number, number, number][] = [
  [0.95, 1, 3.841], [0.99, 1, 6.635],
  [0.95, 10, 18.307], [0.99, 10, 23.209],
  [0.95, 30, 43.773], [0.99, 30, 50.892],
];

describe('quantiles from @stdlib', () => {
  it.each(NIST_F)('F(%d; %d, %d) matches the NIST/SEMATECH F table (|Δ| ≤ 5e-4)', (p, d1, d2, v) => {
    expect(Math.abs(fInv(p, d1, d2) - v)).toBeLessThanOrEqual(5e-4);
  });
  it.each(NIST_CHI2)('χ²(%d; %d) matches the NIST/SEMATECH χ² table (|Δ| ≤ 5e-4)', (p, k, v) => {
    expect(Math.abs(chi2Inv(p, k) - v)).toBeLessThanOrEqual(5e-4);
  });
  it('agrees with scipy.stats ppf to 1e-9 relative (fractional degrees of freedom included)', () => {
    const ref = scipyValues(`print(json.dumps([
      stats.f.ppf(0.99, 3.5, 17.25), stats.chi2.ppf(0.95, 3.682809), stats.chi2.ppf(0.999, 0.7),
      stats.beta.ppf(0.95, 1.5, 13.0), stats.norm.ppf(0.995), stats.t.ppf(0.975, 4)]))`);
    const ours = [fInv(0.99, 3.5, 17.25), chi2Inv(0.95, 3.682809), chi2Inv(0.999, 0.7), betaInv(0.95, 1.5, 13), normalInv(0.995), tInv(0.975, 4)];
    ours.forEach((v, i) => expect(Math.abs(v - ref[i]!) / ref[i]!).toBeLessThan(1e-9));
  });
  it('names the bad argument instead of returning NaN', () => {
    expect(() => fInv(1, 2, 3)).toThrow(/probability 1/);
    expect(() => chi2Inv(0.95, 0)).toThrow(/degrees of freedom = 0/);
    expect(() => betaInv(0.5, -1, 2)).toThrow(/first shape parameter/);
    expect(() => normalInv(Number.NaN)).toThrow(/probability NaN/);
  });
});
