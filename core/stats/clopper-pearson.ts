/**
 * Exact (Clopper & Pearson 1934, Biometrika 26:404) two-sided interval for a binomial proportion
 * k/n: [Beta(α/2; k, n−k+1), Beta(1−α/2; k+1, n−k)], with 0 and 1 at the ends. The one
 * implementation behind the evaluation figures, the approval evidence, the transfer judgement and
 * model health.
 */
import { betaInv } from './quantiles.ts';

export function clopperPearson(k: number, n: number, confidence = 0.95): [number, number] {
  if (!Number.isInteger(k) || !Number.isInteger(n) || n < 1 || k < 0 || k > n) throw new RangeError(`clopperPearson: need integers 0 ≤ k ≤ n, n ≥ 1 (got k=${k}, n=${n})`);
  if (!(confidence > 0 && confidence < 1)) throw new RangeError(`clopperPearson: confidence must be in (0, 1), got ${confidence}`);
  const a = 1 - confidence;
  const lo = k === 0 ? 0 : betaInv(a / 2, k, n - k + 1);
  const hi = k === n ? 1 : betaInv(1 - a / 2, k + 1, n - k);
  return [lo, hi];
}
