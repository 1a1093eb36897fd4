import { describe, expect, it } from 'vitest';
import { bandAt, bandPolygon, clampForLog, classify, limitBand, snapOut, yRange } from '../../web/src/charts/envelope-band.ts';
import { courseRange, logRange } from '../../web/src/charts/chart-options.ts';

const band = { x: [0, 10, 20], mean: [0, 1, 2], lower: [-1, 0, 1], upper: [1, 2, 3] };

describe('envelope band shaping', () => {
  it('interpolates linearly between progress points and refuses outside the range', () => {
    expect(bandAt(band, 5)).toEqual({ mean: 0.5, lower: -0.5, upper: 1.5 });
    expect(bandAt(band, 20)).toEqual({ mean: 2, lower: 1, upper: 3 });
    expect(bandAt(band, 0)).toEqual({ mean: 0, lower: -1, upper: 1 });
    expect(bandAt(band, -0.1)).toBeNull();
    expect(bandAt(band, 20.1)).toBeNull();
    expect(bandAt(band, NaN)).toBeNull();
    expect(bandAt({ x: [], mean: [], lower: [], upper: [] }, 0)).toBeNull();
  });
  it('classifies points above, below, inside and beyond the band', () => {
    expect(classify(band, 5, 1.6)).toBe('above');
    expect(classify(band, 5, -0.6)).toBe('below');
    expect(classify(band, 5, 1.5)).toBe('inside');
    expect(classify(band, 25, 0)).toBe('beyond');
  });
  it('outlines the band as one closed polygon: upper edge forward, lower edge back', () => {
    const p = Array.from(bandPolygon(band, (x) => x * 10, (y) => -y));
    expect(p).toEqual([0, -1, 100, -2, 200, -3, 200, -1, 100, -0, 0, 1]);
  });
  it('y range covers band and data, ignores non-finite values and stays still for small changes', () => {
    const [lo, hi] = yRange(band, [[NaN, 5, -2]]);
    expect(lo).toBeLessThanOrEqual(-2);
    expect(hi).toBeGreaterThanOrEqual(5);
    expect(yRange(band, [[4.55]])).toEqual([-1.3, 4.9]);
    expect(yRange(band, [[4.56]])).toEqual([-1.3, 4.9]);
    expect(yRange(null, [[]])).toEqual([0, 1]);
    expect(yRange(null, [[3, 3]])).toEqual([2, 4]);
  });
  it('snaps outward to tenths of the decade', () => {
    expect(snapOut(0.13, 9.87)).toEqual([0.1, 9.9]);
    const [a, b] = snapOut(-123, 456);
    expect(a).toBe(-130);
    expect(b).toBe(460);
  });
  it('x range spans the golden course and the batch', () => {
    expect(courseRange(band, 2, 8)).toEqual([0, 20]);
    expect(courseRange(band, 2, 30)).toEqual([0, 30]);
    expect(courseRange(null, null, null)).toEqual([0, 1]);
  });
  it('log range covers data and limits over at least one decade', () => {
    expect(logRange(0.5, 3, [{ value: 12, label: 'T² limit (99 %)', style: {} as never }])).toEqual([0.1, 100]);
    expect(logRange(2, 3, [])).toEqual([1, 10]);
  });
  it('one-sided limit band runs from zero to the limit; log clamp keeps zeros visible', () => {
    const b = limitBand([0, 1], [5, 6]);
    expect(Array.from(b.lower)).toEqual([0, 0]);
    expect(b.upper).toEqual([5, 6]);
    expect(Array.from(clampForLog([0, 2, NaN, -1], 0.01))).toEqual([0.01, 2, NaN, 0.01]);
  });
});

describe('axis tick labels', () => {
  it('plain numbers with the decimals the step needs; ×10ⁿ for very small or large ticks', async () => {
    const { tickLabels } = await import('../../web/src/charts/chart-options.ts');
    expect(tickLabels([0, 0.25, 0.5, 0.75])).toEqual(['0', '0.25', '0.50', '0.75']);
    expect(tickLabels([-10, 0, 10, 20])).toEqual(['−10', '0', '10', '20']);
    expect(tickLabels([0, 2.5e-4, 5e-4, 7.5e-4])).toEqual(['0', '2.5×10⁻⁴', '5×10⁻⁴', '7.5×10⁻⁴']);
    expect(tickLabels([1e5, 2e5])).toEqual(['1×10⁵', '2×10⁵']);
    expect(tickLabels([1000, 1200, 1400])).toEqual(['1000', '1200', '1400']);
  });
});

describe('log axis tick labels', () => {
  it('labels uneven (log) ticks one by one', async () => {
    const { tickLabels } = await import('../../web/src/charts/chart-options.ts');
    expect(tickLabels([0.0001, 0.001, 0.01, 0.1])).toEqual(['10⁻⁴', '10⁻³', '0.01', '0.1']);
    expect(tickLabels([1, 2, 5, 10, 20])).toEqual(['1', '2', '5', '10', '20']);
  });
});
