/**
 * Axes as sites write them: wavelengths rounded to 0.01 nm. Savitzky–Golay takes such an axis as
 * evenly spaced (each step within 0.1 % or 0.01 nm of the mean step, whichever is larger), and
 * computes what scipy.signal.savgol_filter computes with delta = the mean step; an axis further from
 * even is refused with the tolerance named, and `{ step: 'resample', even: true }` puts it on an even
 * grid first (numpy.interp onto numpy.linspace over the same ends).
 */
import { describe, expect, it } from 'vitest';
import { matrixFromRows } from '../../core/linalg/dense-matrix.ts';
import { fitChain, PreprocessSpecError, validateChainSpec } from '../../core/preprocess/index.ts';
import { siteAxis } from '../../simulators/site-set.ts';
import { maxAbsDiff, runPython, seededRandom } from './python.ts';

const rnd = seededRandom(11);
// The site-style axis: 397 points 1101.37–2098.81 nm written with 2 decimals (steps of 2.51 or 2.52 nm).
const axis = siteAxis();
const rows = Array.from({ length: 4 }, () => axis.map((l) => 0.5 + 0.3 * Math.exp(-(((l - 1450) / 40) ** 2)) + 0.2 * Math.exp(-(((l - 1940) / 50) ** 2)) + 1e-3 * rnd()));

describe('a wavelength axis rounded to 0.01 nm', () => {
  it('is uneven by up to 0.01 nm per step (more than 0.1 % of 2.52 nm)', () => {
    const steps = axis.slice(1).map((x, j) => x - axis[j]!);
    expect(Math.max(...steps) - Math.min(...steps)).toBeGreaterThan(0.0099);
    expect(Math.max(...steps) - Math.min(...steps)).toBeLessThan(0.0101);
  });

  it('Savitzky–Golay derivative on it equals scipy.signal.savgol_filter(deriv=1, delta=mean step, mode="interp")', () => {
    const c = fitChain([{ step: 'savgol', window: 15, polyorder: 2, deriv: 1 }], axis, matrixFromRows(rows));
    const ref = runPython<number[][]>(
      'from scipy.signal import savgol_filter\na = np.array(inp["a"])\nd = (a[-1] - a[0]) / (len(a) - 1)\nout = [savgol_filter(np.array(r), 15, 2, deriv=1, delta=d, mode="interp").tolist() for r in inp["rows"]]',
      { a: axis, rows },
    );
    rows.forEach((r, i) => expect(maxAbsDiff(c.apply(r), ref[i]!)).toBeLessThan(1e-12));
  });

  it('an axis further from even is refused with the tolerance named, and resampled onto an even grid it passes', () => {
    const uneven = axis.map((x, j) => (j === 200 ? x + 0.02 : x));
    expect(() => fitChain([{ step: 'savgol', window: 15, polyorder: 2, deriv: 1 }], uneven, matrixFromRows(rows))).toThrow(
      /steps\[0\] \(savgol\).*not evenly spaced .*allowed: within 0\.1 % or 0\.01 nm of the mean\); add \{ "step": "resample", "even": true \} before it/,
    );
    const c = fitChain([{ step: 'resample', even: true }, { step: 'savgol', window: 15, polyorder: 2, deriv: 1 }], uneven, matrixFromRows(rows));
    expect(c.outputAxis.length).toBe(axis.length);
    const ref = runPython<{ grid: number[]; y: number[][] }>(
      'from scipy.signal import savgol_filter\na = np.array(inp["a"])\ng = np.linspace(a[0], a[-1], len(a))\nout = {"grid": g.tolist(), "y": [savgol_filter(np.interp(g, a, r), 15, 2, deriv=1, delta=g[1] - g[0], mode="interp").tolist() for r in inp["rows"]]}',
      { a: uneven, rows },
    );
    expect(maxAbsDiff(Array.from(c.outputAxis), ref.grid)).toBeLessThan(1e-9);
    rows.forEach((r, i) => expect(maxAbsDiff(c.apply(r), ref.y[i]!)).toBeLessThan(1e-10));
  });

  it('resample to an even grid of a given number of points; the step names what it needs', () => {
    const c = fitChain([{ step: 'resample', even: true, points: 100 }], axis, matrixFromRows(rows));
    expect(c.outputAxis.length).toBe(100);
    expect(c.outputAxis[0]).toBe(axis[0]);
    expect(c.outputAxis[99]).toBe(axis[axis.length - 1]);
    for (const bad of [[{ step: 'resample' }], [{ step: 'resample', axis: [1200, 1300], even: true }], [{ step: 'resample', axis: [1200, 1300], points: 5 }]]) {
      expect(() => validateChainSpec(bad)).toThrow(PreprocessSpecError);
    }
    expect(() => validateChainSpec([{ step: 'resample' }])).toThrow(/give the target wavelengths \(axis\) or even: true/);
  });
});
