/**
 * Hotelling T² control limits (Tracy, Young & Mason 1992, J. Qual. Technol. 24:88;
 * NIST/SEMATECH e-Handbook 6.5.4.3.4). T² = Σ t_a² / s_a², s_a² the score variance (n − 1).
 */
import { betaInv, chi2Inv, fInv } from '../stats/quantiles.ts';
import { checkConfidence, type Limit } from './limit.ts';

function checkAn(A: number, n: number, minExtra: number, what: string): void {
  if (!Number.isInteger(A) || A < 1) throw new RangeError(`${what}: number of components A = ${A} must be a positive integer`);
  if (!Number.isInteger(n) || n < A + minExtra) {
    throw new RangeError(`${what}: number of calibration samples n = ${n} must be an integer ≥ A + ${minExtra} = ${A + minExtra}`);
  }
}

/** Limit for a new observation: A(n−1)(n+1)/(n(n−A))·F(conf; A, n−A). */
export function t2LimitNew(A: number, n: number, confidence: number): number {
  checkConfidence(confidence, 'T² limit (new observations)');
  checkAn(A, n, 1, 'T² limit (new observations)');
  return ((A * (n - 1) * (n + 1)) / (n * (n - A))) * fInv(confidence, A, n - A);
}

/** Limit for a calibration sample: ((n−1)²/n)·Beta(conf; A/2, (n−A−1)/2). */
export function t2LimitCalibration(A: number, n: number, confidence: number): number {
  checkConfidence(confidence, 'T² limit (calibration samples)');
  checkAn(A, n, 2, 'T² limit (calibration samples)');
  return (((n - 1) * (n - 1)) / n) * betaInv(confidence, A / 2, (n - A - 1) / 2);
}

/** Large-sample limit χ²(conf; A) (the n → ∞ limit of both forms above). */
export function t2LimitChi2(A: number, confidence: number): number {
  checkConfidence(confidence, 'T² limit (χ²)');
  if (!Number.isInteger(A) || A < 1) throw new RangeError(`T² limit (χ²): number of components A = ${A} must be a positive integer`);
  return chi2Inv(confidence, A);
}

export type T2Method = 't2-f-new' | 't2-beta-calibration' | 't2-chi2';

export function t2Limit(method: T2Method, A: number, n: number, confidence: number): Limit {
  switch (method) {
    case 't2-f-new':
      return { value: t2LimitNew(A, n, confidence), confidence, method, reference: 'Tracy, Young & Mason 1992 (F, new observations)' };
    case 't2-beta-calibration':
      return { value: t2LimitCalibration(A, n, confidence), confidence, method, reference: 'Tracy, Young & Mason 1992 (beta, calibration samples)' };
    case 't2-chi2':
      return { value: t2LimitChi2(A, confidence), confidence, method, reference: 'χ²(A), large-sample form' };
    default:
      throw new RangeError(`unknown T² limit method '${String(method)}' (use t2-f-new, t2-beta-calibration or t2-chi2)`);
  }
}
