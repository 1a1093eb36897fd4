/**
 * Time to endpoint from the golden trajectories at the current progress: for each reference batch,
 * the time it still needed from this progress point to its endpoint, scaled by how fast the live
 * batch got here relative to that batch (ratio clamped to 0.5…2); the median and the 10th/90th
 * percentiles of those times give the estimate and its spread. With time as progress the ratio is 1.
 * Batches that started beyond the current progress, and batches without a known endpoint, give no
 * evidence and are left out.
 */
import { firstReachedPoint, type Envelope } from '../envelope/envelope.ts';

export class EtaEstimator {
  private readonly rem: Float64Array;
  /** First grid point each reference batch reached (it started beyond the points before). */
  private readonly first: Int32Array;
  constructor(private readonly env: Envelope) {
    this.rem = new Float64Array(env.nBatches);
    this.first = firstReachedPoint(env);
  }

  estimate(k: number, elapsedMin: number): { median: number; low: number; high: number } | null {
    const env = this.env;
    let n = 0;
    const timeAxis = env.axis.kind === 'time';
    for (let b = 0; b < env.nBatches; b++) {
      const tap = env.timeAtProgress[b][k];
      const end = env.endMin[b];
      if (end === null) continue; // no known endpoint: no evidence of the time to it
      let r: number;
      if (timeAxis) r = end - elapsedMin;
      else if (k < this.first[b]) continue; // this batch started beyond the current progress: no evidence
      else if (tap === null) r = 0; // this batch ended before reaching it
      else {
        let ratio = tap > 1 ? elapsedMin / tap : 1;
        ratio = ratio < 0.5 ? 0.5 : ratio > 2 ? 2 : ratio;
        r = (end - tap) * ratio;
      }
      this.rem[n++] = r > 0 ? r : 0;
    }
    if (n === 0) return null;
    const s = this.rem.subarray(0, n).sort();
    return { median: quantile(s, 0.5), low: quantile(s, 0.1), high: quantile(s, 0.9) };
  }
}

/** Linear-interpolation quantile of sorted values (Hyndman & Fan 1996 type 7). */
function quantile(s: Float64Array, p: number): number {
  const h = (s.length - 1) * p;
  const lo = Math.floor(h);
  const hi = Math.min(s.length - 1, lo + 1);
  return s[lo] + (h - lo) * (s[hi] - s[lo]);
}
