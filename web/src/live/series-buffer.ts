/**
 * Growable columns of numbers for live charts. Appending is amortised O(1); `view(name)` returns a
 * Float64Array view of the filled part without copying, which uPlot draws directly.
 */
export class SeriesBuffer<K extends string> {
  private cols: Record<K, Float64Array>;
  private cap: number;
  length = 0;

  constructor(
    readonly names: readonly K[],
    initialCapacity = 1024,
  ) {
    this.cap = Math.max(16, initialCapacity);
    this.cols = {} as Record<K, Float64Array>;
    for (const n of names) this.cols[n] = new Float64Array(this.cap);
  }

  private grow(min: number): void {
    let cap = this.cap;
    while (cap < min) cap *= 2;
    for (const n of this.names) {
      const next = new Float64Array(cap);
      next.set(this.cols[n].subarray(0, this.length));
      this.cols[n] = next;
    }
    this.cap = cap;
  }

  /** Append one row; missing columns get NaN (drawn as gaps). */
  push(row: Partial<Record<K, number>>): void {
    if (this.length === this.cap) this.grow(this.length + 1);
    const i = this.length++;
    for (const n of this.names) {
      const v = row[n];
      this.cols[n][i] = v === undefined || v === null ? NaN : v;
    }
  }

  /** Drop the oldest rows so at most `max` remain. */
  keepLast(max: number): void {
    if (this.length <= max) return;
    const drop = this.length - max;
    for (const n of this.names) this.cols[n].copyWithin(0, drop, this.length);
    this.length = max;
  }

  clear(): void {
    this.length = 0;
  }

  view(name: K): Float64Array {
    return this.cols[name].subarray(0, this.length);
  }

  at(name: K, i: number): number {
    return this.cols[name][i];
  }

  /** Index of the last row with column `name` ≤ value (columns sorted ascending, e.g. seq); -1 if none. */
  lastIndexAtMost(name: K, value: number): number {
    const c = this.cols[name];
    let lo = 0;
    let hi = this.length - 1;
    let ans = -1;
    while (lo <= hi) {
      const mid = (lo + hi) >> 1;
      if (c[mid] <= value) {
        ans = mid;
        lo = mid + 1;
      } else hi = mid - 1;
    }
    return ans;
  }
}
