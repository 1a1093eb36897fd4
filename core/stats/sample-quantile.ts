/**
 * Sample quantile by linear interpolation between order statistics: Hyndman & Fan (1996, Am.
 * Stat. 50:361) type 7, the default of R's quantile() and numpy.quantile. h = (n − 1)·p,
 * Q(p) = x₍⌊h⌋₎ + (h − ⌊h⌋)·(x₍⌊h⌋+1₎ − x₍⌊h⌋₎) on the sorted values (0-based).
 */
export function sampleQuantile(values: ArrayLike<number>, p: number): number {
  const n = values.length;
  if (n < 1) throw new RangeError('sample quantile: no values');
  if (!(p >= 0 && p <= 1)) throw new RangeError(`sample quantile: p = ${p} must lie in [0, 1]`);
  const s = Float64Array.from(values);
  for (let i = 0; i < n; i++) if (!Number.isFinite(s[i]!)) throw new RangeError(`sample quantile: value ${i} is ${s[i]}`);
  s.sort();
  const h = (n - 1) * p;
  const lo = Math.floor(h);
  const hi = Math.min(n - 1, lo + 1);
  return s[lo]! + (h - lo) * (s[hi]! - s[lo]!);
}
