/**
 * Batch progress: elapsed minutes, or an indicator variable (a monotonic score or a predicted
 * property) so batches of unequal length line up (Nomikos & MacGregor 1995; Kourti 2003, J.
 * Chemom. 17:93 on indicator variables).
 *
 * The indicator is oriented (sign) so that it increases over the batch, smoothed by an
 * exponentially weighted moving average, and made monotonic by a running maximum. The same
 * tracker runs at model build (on the reference batches) and in the live monitor, so a live batch
 * and the envelope share one progress axis.
 */

export type ProgressSpec = { kind: 'time' } | { kind: 'indicator'; source: 'pc1' | 'property' };

export interface ProgressAxis {
  kind: 'time' | 'indicator';
  source?: 'pc1' | 'property';
  /** +1 or −1: multiply the indicator so it increases over the batch. */
  sign: 1 | -1;
  /** EWMA weight of the newest value (1 = no smoothing). */
  alpha: number;
}

export class ProgressTracker {
  private ewma = NaN;
  private maxSoFar = -Infinity;
  constructor(private readonly axis: ProgressAxis) {}
  /** Feed one spectrum: elapsed minutes and the raw indicator (ignored for time). Returns progress. */
  push(elapsedMin: number, indicator: number): number {
    if (this.axis.kind === 'time') return elapsedMin;
    const v = this.axis.sign * indicator;
    this.ewma = Number.isNaN(this.ewma) ? v : this.axis.alpha * v + (1 - this.axis.alpha) * this.ewma;
    if (this.ewma > this.maxSoFar) this.maxSoFar = this.ewma;
    return this.maxSoFar;
  }
  reset(): void {
    this.ewma = NaN;
    this.maxSoFar = -Infinity;
  }
}

/** Progress of a whole sequence (used at build and in review). */
export function progressOf(axis: ProgressAxis, elapsedMin: ArrayLike<number>, indicator: ArrayLike<number>): Float64Array {
  const tr = new ProgressTracker(axis);
  const out = new Float64Array(elapsedMin.length);
  for (let i = 0; i < elapsedMin.length; i++) out[i] = tr.push(elapsedMin[i], indicator[i]);
  return out;
}
