/**
 * Score plateau: least-squares slope of a score against time (per minute) over a window of
 * consecutive spectra; the batch has plateaued when |slope| is within a tolerance.
 */

/** Slope of y on t over indices [from, from + n). */
export function plateauSlope(t: ArrayLike<number>, y: ArrayLike<number>, from: number, n: number): number {
  let st = 0, sy = 0;
  for (let i = from; i < from + n; i++) { st += t[i]; sy += y[i]; }
  const mt = st / n;
  const my = sy / n;
  let sxy = 0, sxx = 0;
  for (let i = from; i < from + n; i++) {
    const dt = t[i] - mt;
    sxy += dt * (y[i] - my);
    sxx += dt * dt;
  }
  return sxx > 0 ? sxy / sxx : 0;
}

/** Streaming form over the last `window` points: ring buffers preallocated, no allocation per push. */
export class PlateauWindow {
  private readonly t: Float64Array;
  private readonly y: Float64Array;
  private count = 0;
  private next = 0;
  constructor(readonly window: number) {
    if (!Number.isInteger(window) || window < 3) throw new RangeError(`plateau window must be an integer ≥ 3 (got ${window})`);
    this.t = new Float64Array(window);
    this.y = new Float64Array(window);
  }
  /** Returns the slope once the window is full, else null. */
  push(tMin: number, y: number): number | null {
    this.t[this.next] = tMin;
    this.y[this.next] = y;
    this.next = (this.next + 1) % this.window;
    if (this.count < this.window) this.count++;
    if (this.count < this.window) return null;
    return plateauSlope(this.t, this.y, 0, this.window);
  }
}
