/**
 * Limit of a positive statistic from reference values by matching g·χ²_h to their mean m and
 * variance v: g = v/(2m), h = 2m²/v (Box 1954; used per time point for SPE by Nomikos &
 * MacGregor 1995, Technometrics 37:41). Check values in docs/check-values.md ("moment form").
 */
import chisqQuantile from '@stdlib/stats-base-dists-chisquare-quantile';

export function momentLimit(values: ArrayLike<number>, confidence: number): number {
  if (!(confidence > 0 && confidence < 1)) throw new RangeError(`confidence must be in (0, 1) (got ${confidence})`);
  let n = 0;
  let s = 0;
  for (let i = 0; i < values.length; i++) if (Number.isFinite(values[i])) { s += values[i]; n++; }
  if (n < 2) throw new RangeError(`a moment-matched limit needs at least 2 values (got ${n})`);
  const m = s / n;
  let ss = 0;
  for (let i = 0; i < values.length; i++) if (Number.isFinite(values[i])) ss += (values[i] - m) ** 2;
  const v = ss / (n - 1);
  if (!(m > 0) || !(v > 0)) return m > 0 ? m : 0;
  const g = v / (2 * m);
  const h = (2 * m * m) / v;
  return g * chisqQuantile(confidence, h);
}
