/**
 * Combined index φ = Q/δ² + T²/τ² (Yue & Qin 2001, Ind. Eng. Chem. Res. 40:4403), with τ² the T²
 * limit and δ² the Q limit; φ ≈ gφ·χ²(hφ), gφ = (A/τ⁴ + θ2/δ⁴)/(A/τ² + θ1/δ²),
 * hφ = (A/τ² + θ1/δ²)²/(A/τ⁴ + θ2/δ⁴).
 */
import { chi2Inv } from '../stats/quantiles.ts';
import { checkConfidence, type Limit } from './limit.ts';

export function combinedIndexParameters(
  A: number,
  theta: readonly [number, number, number],
  t2Limit: number,
  qLimit: number,
): { g: number; h: number } {
  const tau2 = t2Limit;
  const delta2 = qLimit;
  const num = A / (tau2 * tau2) + theta[1] / (delta2 * delta2);
  const den = A / tau2 + theta[0] / delta2;
  return { g: num / den, h: (den * den) / num };
}

export function combinedIndexLimit(
  A: number,
  theta: readonly [number, number, number],
  t2Limit: number,
  qLimit: number,
  confidence: number,
): number {
  const what = 'combined index limit (Yue & Qin)';
  checkConfidence(confidence, what);
  if (!Number.isInteger(A) || A < 1) throw new RangeError(`${what}: A = ${A} must be a positive integer`);
  if (!(t2Limit > 0)) throw new RangeError(`${what}: T² limit ${t2Limit} must be positive`);
  if (!(qLimit > 0)) throw new RangeError(`${what}: Q limit ${qLimit} must be positive`);
  if (!(theta[0] > 0 && theta[1] > 0)) throw new RangeError(`${what}: θ1 = ${theta[0]}, θ2 = ${theta[1]} must be positive`);
  const { g, h } = combinedIndexParameters(A, theta, t2Limit, qLimit);
  return g * chi2Inv(confidence, h);
}

/** The combined index of one observation. */
export function combinedIndex(t2: number, q: number, t2Limit: number, qLimit: number): number {
  return q / qLimit + t2 / t2Limit;
}

export function combinedLimit(A: number, theta: readonly [number, number, number], t2Limit: number, qLimit: number, confidence: number): Limit {
  return {
    value: combinedIndexLimit(A, theta, t2Limit, qLimit, confidence),
    confidence,
    method: 'combined-yue-qin',
    reference: 'Yue & Qin 2001',
  };
}
