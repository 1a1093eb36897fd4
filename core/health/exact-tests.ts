/**
 * Exact tests for model health: the two-sided binomial test of a proportion (the method of
 * scipy.stats.binomtest: the p-value sums the probabilities of every outcome no more likely than
 * the one observed, with scipy's relative tolerance 1 + 1e-7), the upper tail of a Poisson count,
 * and the t interval of a mean. Pure; O(n) per binomial test, no allocation beyond a scalar loop.
 */
import { tInv } from '../stats/quantiles.ts';

function checkCount(k: number, n: number, what: string): void {
  if (!(Number.isInteger(k) && Number.isInteger(n) && n > 0 && k >= 0 && k <= n)) throw new RangeError(`${what}: need integers 0 ≤ k ≤ n, n > 0 (got k = ${k}, n = ${n})`);
}

/** log of the binomial probability of 0 successes is n·log(1−p); each next one by the ratio (n−i)/(i+1)·p/(1−p). */
function logPmfStep(n: number, i: number, logOdds: number): number {
  return Math.log((n - i) / (i + 1)) + logOdds;
}

/**
 * Two-sided exact binomial test of H0: proportion = p, for k successes in n trials.
 * Same definition as scipy.stats.binomtest(k, n, p, alternative='two-sided').pvalue.
 */
export function binomialTestTwoSided(k: number, n: number, p: number): number {
  checkCount(k, n, 'binomial test');
  if (!(p > 0 && p < 1)) throw new RangeError(`binomial test: p = ${p} must be strictly between 0 and 1`);
  const logOdds = Math.log(p) - Math.log1p(-p);
  // log pmf of the observed k, by the same recurrence used below (so ties compare exactly alike).
  let lp = n * Math.log1p(-p);
  let lk = lp;
  for (let i = 0; i < k; i++) lk += logPmfStep(n, i, logOdds);
  const threshold = lk + Math.log1p(1e-7);
  // Sum pmf(i) ≤ pmf(k)·(1 + 1e-7), scaled by exp(−lk) for range; then back.
  let sum = 0;
  for (let i = 0; i <= n; i++) {
    if (lp <= threshold) sum += Math.exp(lp - lk);
    if (i < n) lp += logPmfStep(n, i, logOdds);
  }
  return Math.min(1, sum * Math.exp(lk));
}

/** P(X ≥ k) for X ~ Poisson(mu). */
export function poissonUpperTail(k: number, mu: number): number {
  if (!(Number.isInteger(k) && k >= 0)) throw new RangeError(`Poisson tail: k = ${k} must be a non-negative integer`);
  if (!(mu > 0) || !Number.isFinite(mu)) throw new RangeError(`Poisson tail: mean ${mu} must be a positive finite number`);
  if (k === 0) return 1;
  // 1 − P(X ≤ k − 1), summed in log space term by term.
  let lp = -mu;
  let cdf = 0;
  for (let i = 0; i < k; i++) {
    cdf += Math.exp(lp);
    lp += Math.log(mu) - Math.log(i + 1);
  }
  if (cdf < 0.5) return 1 - cdf;
  // Far in the tail: sum the upper terms directly (avoids 1 − cdf cancelling).
  let tail = 0;
  for (let i = k; ; i++) {
    const term = Math.exp(lp);
    tail += term;
    if (i > mu && term < tail * 1e-17) break;
    lp += Math.log(mu) - Math.log(i + 1);
  }
  return tail;
}

/** Mean of xs with its two-sided t interval at `confidence`; needs at least 2 values. */
export function tInterval(xs: ArrayLike<number>, confidence: number): { n: number; mean: number; sd: number; interval: [number, number] } {
  const n = xs.length;
  if (n < 2) throw new RangeError(`t interval: need at least 2 values (got ${n})`);
  let m = 0;
  for (let i = 0; i < n; i++) m += xs[i]!;
  m /= n;
  let ss = 0;
  for (let i = 0; i < n; i++) ss += (xs[i]! - m) ** 2;
  const sd = Math.sqrt(ss / (n - 1));
  const h = tInv(1 - (1 - confidence) / 2, n - 1) * (sd / Math.sqrt(n));
  return { n, mean: m, sd, interval: [m - h, m + h] };
}

/** log of the binomial coefficient C(n, k), summed term by term (n up to a few thousand here). */
function logChoose(n: number, k: number): number {
  let s = 0;
  for (let i = 1; i <= k; i++) s += Math.log(n - k + i) - Math.log(i);
  return s;
}

/**
 * One-sided Fisher exact test (Fisher 1935) of a 2 × 2 table — k of n in the first group against kb
 * of nb in the second — for a larger proportion in the first: P(X ≥ k), X hypergeometric with N = n + nb,
 * K = k + kb successes, n drawn. Same as scipy.stats.fisher_exact([[k, n − k], [kb, nb − kb]],
 * alternative='greater').pvalue.
 */
export function fisherExactGreater(k: number, n: number, kb: number, nb: number): number {
  checkCount(k, n, 'Fisher exact test');
  checkCount(kb, nb, 'Fisher exact test');
  const N = n + nb;
  const K = k + kb;
  const hi = Math.min(n, K);
  const lc = logChoose(N, n);
  let sum = 0;
  for (let x = k; x <= hi; x++) sum += Math.exp(logChoose(K, x) + logChoose(N - K, n - x) - lc);
  return Math.min(1, sum);
}
