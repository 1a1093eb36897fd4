/** Pick up to `n` indices spread evenly over 0…len−1 (first and last included): for thinning a series to draw. */
export function spreadIndices(len: number, n: number): number[] {
  if (len <= 0 || n <= 0) return [];
  if (len <= n) return Array.from({ length: len }, (_, i) => i);
  if (n === 1) return [0];
  return Array.from({ length: n }, (_, k) => Math.round((k * (len - 1)) / (n - 1)));
}
