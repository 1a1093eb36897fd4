/**
 * Shaping the golden envelope for drawing: interpolation at a progress value, the y range a chart
 * needs to show band and batch together, classification of batch points, and the outline polygon
 * of the band in pixel space. Pure functions.
 */

export interface Band {
  /** Progress points, ascending. */
  x: ArrayLike<number>;
  mean: ArrayLike<number>;
  lower: ArrayLike<number>;
  upper: ArrayLike<number>;
}

/** Linear interpolation of the band at progress `p`; null outside the band's progress range. */
export function bandAt(b: Band, p: number): { mean: number; lower: number; upper: number } | null {
  const n = b.x.length;
  if (n === 0 || !Number.isFinite(p) || p < b.x[0] || p > b.x[n - 1]) return null;
  let lo = 0;
  let hi = n - 1;
  while (hi - lo > 1) {
    const mid = (lo + hi) >> 1;
    if (b.x[mid] <= p) lo = mid;
    else hi = mid;
  }
  if (n === 1 || b.x[hi] === b.x[lo]) return { mean: b.mean[lo], lower: b.lower[lo], upper: b.upper[lo] };
  const f = (p - b.x[lo]) / (b.x[hi] - b.x[lo]);
  const lerp = (a: ArrayLike<number>) => a[lo] + f * (a[hi] - a[lo]);
  return { mean: lerp(b.mean), lower: lerp(b.lower), upper: lerp(b.upper) };
}

export type PointStatus = 'inside' | 'above' | 'below' | 'beyond';

/** Where a batch point lies relative to the band; 'beyond' when its progress is outside the band's range. */
export function classify(b: Band, p: number, y: number): PointStatus {
  const at = bandAt(b, p);
  if (!at) return 'beyond';
  if (y > at.upper) return 'above';
  if (y < at.lower) return 'below';
  return 'inside';
}

/** Min and max over band and finite values of the given series, padded by `pad` of the span. */
export function yRange(b: Band | null, series: ArrayLike<number>[], pad = 0.05): [number, number] {
  let lo = Infinity;
  let hi = -Infinity;
  if (b) {
    for (let i = 0; i < b.x.length; i++) {
      if (b.lower[i] < lo) lo = b.lower[i];
      if (b.upper[i] > hi) hi = b.upper[i];
    }
  }
  for (const s of series) {
    for (let i = 0; i < s.length; i++) {
      const v = s[i];
      if (Number.isFinite(v)) {
        if (v < lo) lo = v;
        if (v > hi) hi = v;
      }
    }
  }
  if (!Number.isFinite(lo)) return [0, 1];
  if (lo === hi) return [lo - 1, hi + 1];
  const d = (hi - lo) * pad;
  return snapOut(lo - d, hi + d);
}

/**
 * Widen [lo, hi] outward to multiples of a tenth of the span's decade, so a live chart's axis
 * stays still while new points move the data's extremes a little.
 */
export function snapOut(lo: number, hi: number): [number, number] {
  const step = 10 ** Math.floor(Math.log10(hi - lo)) / 10;
  const r = (v: number) => Number(v.toPrecision(12));
  return [r(Math.floor(lo / step) * step), r(Math.ceil(hi / step) * step)];
}

/**
 * Outline of the band as one closed polygon: along the upper edge left to right, then back along
 * the lower edge. `px`/`py` map data to pixels (e.g. uPlot's valToPos).
 */
export function bandPolygon(b: Band, px: (x: number) => number, py: (y: number) => number): Float64Array {
  const n = b.x.length;
  const out = new Float64Array(n * 4);
  for (let i = 0; i < n; i++) {
    out[2 * i] = px(b.x[i]);
    out[2 * i + 1] = py(b.upper[i]);
  }
  for (let i = 0; i < n; i++) {
    const j = n - 1 - i;
    out[2 * (n + i)] = px(b.x[j]);
    out[2 * (n + i) + 1] = py(b.lower[j]);
  }
  return out;
}

/** Band of a (local) one-sided limit such as T²: zero up to the limit. */
export function limitBand(x: ArrayLike<number>, limit: ArrayLike<number>): Band {
  return { x, mean: limit, lower: new Float64Array(x.length), upper: limit };
}

/**
 * For a log-scale chart values ≤ 0 cannot be drawn; clamp them to a small positive floor so a
 * zero statistic still shows at the bottom rather than vanishing. Returns a new array.
 */
export function clampForLog(values: ArrayLike<number>, floor: number): Float64Array {
  const out = new Float64Array(values.length);
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    out[i] = Number.isFinite(v) ? Math.max(v, floor) : NaN;
  }
  return out;
}
