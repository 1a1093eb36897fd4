/**
 * Pace against the golden batches, for envelopes on an indicator-variable axis.
 *
 * When progress is an indicator variable (a predicted property, a monotonic score), batches of
 * unequal length line up, and the time a batch takes to reach each indicator value becomes a
 * variable of its own to monitor (Kourti 2003, J. Chemom. 17:93, on indicator variables; the
 * idea of monitoring the time warp alongside the aligned trajectories is in Kassidas, MacGregor &
 * Taylor 1998, AIChE J. 44:864). A batch that stalls — a reaction whose catalyst died, a dryer
 * whose heater failed — stays at one progress point while the clock runs: every score can sit
 * inside its envelope there, and only the pace shows it.
 *
 * From the first progress point the live batch is judged at (k0, reached at elapsed time t0), the
 * live batch at grid point k has not yet reached k + 1; each reference batch b took
 * d_b = time_b(k + 1) − time_b(k0) to get there, and the live batch has already taken t − t0
 * without arriving. Durations vary multiplicatively (rate constants, drying rates), so the
 * comparison is on ln d: z = (ln(t − t0) − mean ln d_b) / sd ln d_b, one-sided — slower than the
 * golden batches. The anchor k0 is where the live batch first moves on from the progress point it
 * started at (warming up at the start is not slowness); a batch that never moves on is not judged
 * here — its missing endpoint and time-to-endpoint estimate show it. Faster
 * batches are not judged here (their scores and T²/Q still are). Judged only where at least
 * `minBatches` reference batches passed both points and the golden batches needed at least
 * `minSpanMin` minutes for the stretch (below that, ln d is dominated by noise in the indicator).
 */
import { firstReachedPoint, type Envelope } from '../envelope/envelope.ts';

export interface PaceStatus {
  /** Minutes the live batch has taken since k0 (without reaching the next grid point yet). */
  tookMin: number;
  /** Minutes the golden batches took from k0 to the next grid point: exp(mean ln d). */
  expectedMin: number;
  /** Upper end of the band: exp(mean ln d + k·sd ln d). */
  upperMin: number;
  /** How many sd of ln d the live batch is slower (negative: faster). */
  z: number;
}

export class PaceCheck {
  private readonly d: Float64Array;
  private readonly first: Int32Array;
  private k0 = -1;
  private t0 = 0;
  private startK = -1;

  constructor(
    private readonly env: Envelope,
    /** Band half-width in sd of ln d at which the pace condition is raised. */
    readonly k: number,
    private readonly minBatches: number,
    private readonly minSpanMin = 5,
  ) {
    this.d = new Float64Array(env.nBatches);
    this.first = firstReachedPoint(env);
  }

  /** Reference batches that passed through grid point k (reached it, not started beyond it). */
  private passedThrough(k: number): number {
    let n = 0;
    for (let b = 0; b < this.env.nBatches; b++) if (k >= this.first[b] && this.env.timeAtProgress[b][k] !== null) n++;
    return n;
  }

  /** Start judging from grid point k at elapsed time t. */
  private anchor(k: number, elapsedMin: number): void {
    this.k0 = k;
    this.t0 = elapsedMin;
  }

  /** The pace at grid point k and elapsed minutes, or null where it cannot be judged. */
  update(k: number, elapsedMin: number): PaceStatus | null {
    if (this.k0 < 0) {
      // Anchor where the batch first moves on from the point it started at: a batch may wait at
      // its first progress point (heating up) for longer than the golden batches took to pass
      // that point mid-course, which says nothing about its pace.
      // It also waits for a point that enough reference batches passed through (those that started
      // beyond it give no time for the stretch).
      if (this.startK < 0) this.startK = k;
      if (k === this.startK || this.passedThrough(k) < this.minBatches) return null;
      this.anchor(k, elapsedMin);
    }
    const k0 = this.k0;
    const next = Math.min(k + 1, this.env.grid.length - 1);
    if (next <= k0) return null;
    const tap = this.env.timeAtProgress;
    let n = 0;
    let s = 0;
    let ss = 0;
    let spanSum = 0;
    for (let b = 0; b < this.env.nBatches; b++) {
      if (k0 < this.first[b]) continue; // started beyond k0: no time for the stretch
      const a = tap[b][k0];
      const c = tap[b][next];
      if (a === null || c === null) continue;
      const dur = c - a;
      if (!(dur > 0)) continue;
      const l = Math.log(dur);
      this.d[n++] = l;
      s += l;
      ss += l * l;
      spanSum += dur;
    }
    if (n < this.minBatches || spanSum / n < this.minSpanMin) return null;
    const mean = s / n;
    const v = (ss - n * mean * mean) / (n - 1);
    const sd = v > 0 ? Math.sqrt(v) : 0;
    const took = elapsedMin - this.t0;
    if (!(took > 0) || !(sd > 0)) return null;
    const z = (Math.log(took) - mean) / sd;
    return { tookMin: took, expectedMin: Math.exp(mean), upperMin: Math.exp(mean + this.k * sd), z };
  }
}
