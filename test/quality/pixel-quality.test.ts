/**
 * Pixel-quality flags (core/quality/pixel-quality.ts), bridging and the chain footprint
 * (core/quality/bad-pixels.ts) on simulated dryer and reactor spectra with injected faults.
 * The flag definitions are ours (docs/bad-pixels.md); the robust scale is the MAD (Hampel 1974).
 */
import { describe, expect, it } from 'vitest';
import { simulateBatch } from '../../simulators/batch.ts';
import { createPixelQualityChecker, PIXEL_FLAG_BIT, resolvePixelQuality } from '../../core/quality/pixel-quality.ts';
import { bridgeBadPixels, ChainFootprint } from '../../core/quality/bad-pixels.ts';
import { fitChain } from '../../core/preprocess/index.ts';
import { matrixFromRows } from '../../core/linalg/dense-matrix.ts';

const dryer = simulateBatch('dryer', { seed: 4242 });
const reactor = simulateBatch('reactor', { seed: 4243 });

function flagsAt(mask: Uint8Array): Map<number, number> {
  const m = new Map<number, number>();
  mask.forEach((b, j) => { if (b) m.set(j, b); });
  return m;
}

describe('pixel quality flags', () => {
  it('flags nothing on good simulated batches (dryer and reactor, every spectrum)', () => {
    for (const b of [dryer, reactor]) {
      const chk = createPixelQualityChecker(b.axis.length);
      let bad = 0;
      for (const x of b.spectra) bad += chk.check(x).bad;
      expect(bad).toBe(0);
    }
  });

  it('names a non-finite value, a spike, a dead pixel and a clipped run, each at its pixel', () => {
    const chk = createPixelQualityChecker(dryer.axis.length);
    const x = Float64Array.from(dryer.spectra[40]!);
    x[20] = NaN;
    x[100] += 0.05; // a single-pixel spike of 0.05 absorbance
    x[150] = 0; // dead element
    const top = Math.max(...Array.from(x).filter(Number.isFinite)) + 0.3;
    x[200] = x[201] = x[202] = top; // clipped at the converter's limit
    const q = chk.check(x);
    const f = flagsAt(q.mask);
    expect(f.get(20)).toBe(PIXEL_FLAG_BIT['non-finite']);
    expect(f.get(100)).toBe(PIXEL_FLAG_BIT.spike);
    expect(f.get(150)).toBe(PIXEL_FLAG_BIT.dead);
    for (const j of [200, 201, 202]) expect(f.get(j)! & PIXEL_FLAG_BIT.saturated).toBeTruthy();
    expect(q.counts).toEqual({ 'non-finite': 1, saturated: 3, dead: 1, stuck: 0, spike: 1 });
    expect(q.bad).toBe(6);
    expect(q.badFraction).toBeCloseTo(6 / dryer.axis.length, 12);
  });

  it('flags values at or beyond a configured saturation level', () => {
    const chk = createPixelQualityChecker(reactor.axis.length, { saturationLevel: 0.9 });
    const x = Float64Array.from(reactor.spectra[10]!);
    const over = Array.from(x).filter((v) => v >= 0.9).length;
    const q = chk.check(x);
    expect(q.counts.saturated).toBe(over);
    expect(over).toBeGreaterThan(0);
  });

  it('finds a stuck pixel from the analyzer history, not a resent spectrum', () => {
    const chk = createPixelQualityChecker(dryer.axis.length, { stuckSpectra: 5 });
    const stuckAt = 77;
    const frozen = dryer.spectra[30]![stuckAt]!;
    const seen: number[] = [];
    for (let i = 30; i < 40; i++) {
      const x = Float64Array.from(dryer.spectra[i]!);
      x[stuckAt] = frozen;
      seen.push(chk.check(x).mask[stuckAt]!);
    }
    // repeated over 5 spectra from the 5th on
    expect(seen).toEqual([0, 0, 0, 0, 8, 8, 8, 8, 8, 8]);
    const again = createPixelQualityChecker(dryer.axis.length);
    for (let i = 0; i < 8; i++) expect(again.check(dryer.spectra[50]!).bad).toBe(0);
  });

  it('flags a spike in the reactor spectra but not the sharpest band', () => {
    const chk = createPixelQualityChecker(reactor.axis.length);
    const x = Float64Array.from(reactor.spectra[100]!);
    x[300] -= 0.03;
    const q = chk.check(x);
    expect([...flagsAt(q.mask).keys()]).toEqual([300]);
  });

  it('refuses settings that make no sense, naming the setting', () => {
    expect(() => resolvePixelQuality({ clipRun: 1 })).toThrow(/clipRun = 1/);
    expect(() => resolvePixelQuality({ maxBadFraction: 1 })).toThrow(/maxBadFraction/);
    expect(() => createPixelQualityChecker(10).check(new Float64Array(9))).toThrow(/9 values, the analyzer's axis 10/);
  });
});

describe('bridging and the chain footprint', () => {
  it('bridges a bad run by the straight line between its good neighbours, ends by the nearest good value', () => {
    const x = [1, 2, NaN, NaN, 8, 9, NaN];
    const mask = [0, 0, 1, 1, 0, 0, 1];
    const out = new Float64Array(7);
    expect(bridgeBadPixels(x, mask, out)).toBe(true);
    expect(Array.from(out)).toEqual([1, 2, 4, 6, 8, 9, 9]);
    expect(bridgeBadPixels([NaN, 3, 4], [1, 0, 0], out.subarray(0, 3))).toBe(true);
    expect(out[0]).toBe(3);
    expect(bridgeBadPixels([1, 2], [1, 1], new Float64Array(2))).toBe(false);
  });

  it('maps a pixel to the variables it reaches: a Savitzky–Golay window, none outside a selected range', () => {
    const axis = dryer.axis;
    const raw = matrixFromRows(dryer.spectra.slice(0, 30));
    const sg = fitChain([{ step: 'savgol', window: 7, polyorder: 2, deriv: 1 }, { step: 'snv' }, { step: 'scale', center: true, scaling: 'none' }], axis, raw);
    const fp = new ChainFootprint(sg);
    expect(Array.from(fp.of(100, dryer.spectra[5]!))).toEqual([97, 98, 99, 101, 102, 103]); // the 1st-derivative window has a zero centre weight
    const sel = fitChain([{ step: 'select', ranges: [[1100, 1300]] }, { step: 'scale', center: true, scaling: 'none' }], axis, raw);
    const fs = new ChainFootprint(sel);
    const inside = axis.findIndex((l) => l >= 1200);
    const k = Array.from(sel.outputAxis).indexOf(axis[inside]!);
    expect(Array.from(fs.of(inside, dryer.spectra[5]!))).toEqual([k]);
    expect(fs.of(0, dryer.spectra[5]!).length).toBe(0);
  });
});
