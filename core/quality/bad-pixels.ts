/**
 * Getting a spectrum with bad pixels through the model's preprocessing chain:
 *
 * - bridgeBadPixels: each run of bad pixels is replaced by the straight line between the nearest
 *   good pixels on either side (the nearest good value at an end), so the steps that use the whole
 *   spectrum (SNV, MSC, detrend) see plausible values and the chain sees finite ones;
 * - ChainFootprint: which model variables (after the chain) a raw pixel reaches. Those are the
 *   variables treated as missing in the projection (core/pca/tsr-projector.ts). The reach of a
 *   pixel is found once per pixel, by perturbing it on the first spectrum where it is bad and
 *   keeping the outputs whose change stands out from the spectrum-wide change a whole-spectrum step
 *   spreads (more than 20 times the median change and 0.1 % of the largest): a range selection
 *   maps it to one variable or none, a resampling to its neighbours, a Savitzky–Golay filter to its
 *   window. Cached per pixel, so a stuck pixel costs nothing after its first spectrum.
 */
import type { FittedChain } from '../preprocess/index.ts';

/** Write `values` with its bad pixels (mask ≠ 0) bridged into `out`; false when no pixel is good. */
export function bridgeBadPixels(values: ArrayLike<number>, mask: ArrayLike<number>, out: Float64Array): boolean {
  const p = values.length;
  let lastGood = -1;
  let j = 0;
  while (j < p) {
    if (!mask[j]) {
      out[j] = values[j]!;
      lastGood = j;
      j++;
      continue;
    }
    let end = j;
    while (end < p && mask[end]) end++;
    // bad run j … end − 1
    if (lastGood < 0 && end >= p) return false;
    if (lastGood < 0) for (let k = j; k < end; k++) out[k] = values[end]!;
    else if (end >= p) for (let k = j; k < end; k++) out[k] = values[lastGood]!;
    else {
      const a = values[lastGood]!;
      const b = values[end]!;
      const span = end - lastGood;
      for (let k = j; k < end; k++) out[k] = a + ((b - a) * (k - lastGood)) / span;
    }
    j = end;
  }
  return true;
}

export class ChainFootprint {
  private readonly reach = new Map<number, Int32Array>();
  private readonly base: Float64Array;
  private readonly pert: Float64Array;
  private readonly outBase: Float64Array;
  private readonly outPert: Float64Array;
  private readonly diff: Float64Array;

  constructor(private readonly chain: FittedChain) {
    const pIn = chain.inputAxis.length;
    const p = chain.outputAxis.length;
    this.base = new Float64Array(pIn);
    this.pert = new Float64Array(pIn);
    this.outBase = new Float64Array(p);
    this.outPert = new Float64Array(p);
    this.diff = new Float64Array(p);
  }

  /** The model variables raw pixel j reaches, found around the (bridged, finite) spectrum `around`. */
  of(j: number, around: ArrayLike<number>): Int32Array {
    const hit = this.reach.get(j);
    if (hit) return hit;
    const { base, pert, outBase, outPert, diff } = this;
    for (let k = 0; k < base.length; k++) base[k] = around[k]!;
    pert.set(base);
    let lo = Infinity;
    let hi = -Infinity;
    for (let k = 0; k < base.length; k++) {
      if (base[k]! < lo) lo = base[k]!;
      if (base[k]! > hi) hi = base[k]!;
    }
    const delta = 1e-3 * Math.max(hi - lo, Math.abs(base[j]!), 1e-3);
    pert[j] = base[j]! + delta;
    this.chain.apply(base, outBase);
    this.chain.apply(pert, outPert);
    const p = outBase.length;
    let max = 0;
    for (let k = 0; k < p; k++) {
      diff[k] = Math.abs(outPert[k]! - outBase[k]!);
      if (diff[k]! > max) max = diff[k]!;
    }
    const sorted = Float64Array.from(diff).sort();
    const median = sorted[p >> 1] ?? 0;
    const thr = Math.max(20 * median, 1e-3 * max);
    const list: number[] = [];
    if (max > 0) for (let k = 0; k < p; k++) if (diff[k]! > thr) list.push(k);
    const r = Int32Array.from(list);
    this.reach.set(j, r);
    return r;
  }

  /**
   * Mark in `missing` (length = model variables) every variable a bad pixel reaches; returns how
   * many are marked. `bridged` is the spectrum with its bad pixels bridged.
   */
  missingVariables(mask: ArrayLike<number>, bridged: ArrayLike<number>, missing: Uint8Array): number {
    missing.fill(0);
    let n = 0;
    for (let j = 0; j < mask.length; j++) {
      if (!mask[j]) continue;
      const r = this.of(j, bridged);
      for (let i = 0; i < r.length; i++) {
        const k = r[i]!;
        if (!missing[k]) {
          missing[k] = 1;
          n++;
        }
      }
    }
    return n;
  }
}
