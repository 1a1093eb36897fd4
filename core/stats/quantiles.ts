/**
 * Quantiles of the distributions the control limits need, taken from @stdlib (never hand-written).
 * Each wrapper checks its arguments and names the bad one instead of returning NaN silently.
 */
import fQuantile from '@stdlib/stats-base-dists-f-quantile';
import chisquareQuantile from '@stdlib/stats-base-dists-chisquare-quantile';
import betaQuantile from '@stdlib/stats-base-dists-beta-quantile';
import normalQuantile from '@stdlib/stats-base-dists-normal-quantile';
import tQuantile from '@stdlib/stats-base-dists-t-quantile';

function checkProbability(p: number, what: string): void {
  if (!(p > 0 && p < 1)) throw new RangeError(`${what}: probability ${p} is not strictly between 0 and 1`);
}
function checkPositive(v: number, name: string, what: string): void {
  if (!(v > 0) || !Number.isFinite(v)) throw new RangeError(`${what}: ${name} = ${v} must be a positive finite number`);
}

/** F quantile F(p; d1, d2). */
export function fInv(p: number, d1: number, d2: number): number {
  checkProbability(p, 'F quantile');
  checkPositive(d1, 'numerator degrees of freedom', 'F quantile');
  checkPositive(d2, 'denominator degrees of freedom', 'F quantile');
  return fQuantile(p, d1, d2);
}

/** χ² quantile χ²(p; k); k need not be an integer (Box 1954 uses a fractional h). */
export function chi2Inv(p: number, k: number): number {
  checkProbability(p, 'chi-square quantile');
  checkPositive(k, 'degrees of freedom', 'chi-square quantile');
  return chisquareQuantile(p, k);
}

/** Beta quantile Beta(p; a, b). */
export function betaInv(p: number, a: number, b: number): number {
  checkProbability(p, 'beta quantile');
  checkPositive(a, 'first shape parameter', 'beta quantile');
  checkPositive(b, 'second shape parameter', 'beta quantile');
  return betaQuantile(p, a, b);
}

/** Standard normal quantile z(p). */
export function normalInv(p: number): number {
  checkProbability(p, 'normal quantile');
  return normalQuantile(p, 0, 1);
}

/** Student t quantile t(p; ν). */
export function tInv(p: number, nu: number): number {
  checkProbability(p, 't quantile');
  checkPositive(nu, 'degrees of freedom', 't quantile');
  return tQuantile(p, nu);
}
