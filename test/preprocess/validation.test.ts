import { describe, expect, it } from 'vitest';
import { fitChain, validateChainSpec, PreprocessSpecError } from '../../core/preprocess/index.ts';
import { matrixFromRows } from '../../core/linalg/dense-matrix.ts';

const axis = Array.from({ length: 21 }, (_, j) => 1000 + 5 * j); // 1000…1100 nm
const cal = matrixFromRows([axis.map((l) => Math.sin(l / 10)), axis.map((l) => Math.cos(l / 10))]);

function refusal(fn: () => unknown): PreprocessSpecError {
  try {
    fn();
  } catch (e) {
    if (e instanceof PreprocessSpecError) return e;
    throw e;
  }
  throw new Error('not refused');
}

describe('chain spec validation names step index, step and parameter', () => {
  it.each([
    [[{ step: 'snv' }, { step: 'savgol', window: 8, polyorder: 2, deriv: 1 }], 1, 'savgol', 'window', /must be odd; got 8/],
    [[{ step: 'savgol', window: 7, polyorder: 7, deriv: 0 }], 0, 'savgol', 'polyorder', /below window \(7\)/],
    [[{ step: 'savgol', window: 7, polyorder: 1, deriv: 2 }], 0, 'savgol', 'deriv', /polyorder ≥ 2/],
    [[{ step: 'savgol', window: 7, polyorder: 2, deriv: 3 }], 0, 'savgol', 'deriv', /must be 0 \(smoothing\), 1 or 2/],
    [[{ step: 'snv' }, { step: 'smooth' }], 1, 'smooth', 'step', /unknown step; known steps: select, exclude/],
    [[{ step: 'select', ranges: [[1000, 1050], [1040, 1080]] }], 0, 'select', 'ranges', /range 1 \[1040, 1080\] overlaps range 0/],
    [[{ step: 'exclude', ranges: [[1050, 1050]] }], 0, 'exclude', 'ranges', /empty/],
    [[{ step: 'exclude', ranges: [] }], 0, 'exclude', 'ranges', /at least one/],
    [[{ step: 'detrend', order: 1.5 }], 0, 'detrend', 'order', /./],
    [[{ step: 'scale', center: true, scaling: 'log' }], 0, 'scale', 'scaling', /./],
    [[{ step: 'snv', window: 3 }], 0, 'snv', 'window', /not a parameter of snv/],
    [[{ step: 'savgol', window: 1003, polyorder: 2, deriv: 0 }], 0, 'savgol', 'window', /1001/],
    [[{ window: 5 }], 0, 'missing', 'step', /unknown step/],
    [[{ step: 'savgol', window: '7', polyorder: 2, deriv: 0 }], 0, 'savgol', 'window', /number/],
    [[{ step: 'resample', axis: [1000, 1000, 1010] }], 0, 'resample', 'axis', /increase strictly/],
  ])('%j → steps[%i] (%s) %s', (spec, index, step, parameter, detail) => {
    const e = refusal(() => validateChainSpec(spec));
    expect(e.stepIndex).toBe(index);
    expect(e.step).toBe(step);
    expect(e.parameter).toBe(parameter);
    expect(e.message).toMatch(detail);
    expect(e.message).toContain(`steps[${index}] (${step})`);
    expect(e.message).toContain(`'${parameter}'`);
  });

  it('refuses what only the axis can tell, at fit, in the same form', () => {
    let e = refusal(() => fitChain([{ step: 'select', ranges: [[1000, 1030]] }, { step: 'savgol', window: 9, polyorder: 2, deriv: 0 }], axis, cal));
    expect([e.stepIndex, e.step, e.parameter]).toEqual([1, 'savgol', 'window']);
    expect(e.message).toMatch(/window 9 is longer than the 7 variables/);
    e = refusal(() => fitChain([{ step: 'select', ranges: [[1200, 1300]] }], axis, cal));
    expect([e.stepIndex, e.parameter]).toEqual([0, 'ranges']);
    expect(e.message).toMatch(/holds no wavelength/);
    e = refusal(() => fitChain([{ step: 'snv' }, { step: 'resample', axis: [990, 1000, 1010] }], axis, cal));
    expect([e.stepIndex, e.step, e.parameter]).toEqual([1, 'resample', 'axis']);
    expect(e.message).toMatch(/990 nm lies outside .* extrapolation is refused/);
    e = refusal(() => fitChain([{ step: 'exclude', ranges: [[1020, 1030]] }, { step: 'savgol', window: 5, polyorder: 2, deriv: 1 }], axis, cal));
    expect(e.message).toMatch(/steps\[1\] \(savgol\).*not evenly spaced.*"resample", "even": true/);
    e = refusal(() => fitChain([{ step: 'select', ranges: [[1000, 1005]] }, { step: 'detrend', order: 2 }], axis, cal));
    expect([e.stepIndex, e.parameter]).toEqual([1, 'order']);
    e = refusal(() => fitChain([{ step: 'scale', center: true, scaling: 'uv' }], axis, matrixFromRows([axis, axis])));
    expect(e.message).toMatch(/1000 nm has zero standard deviation/);
  });

  it('refuses a chain that is not an array', () => {
    expect(() => validateChainSpec({ step: 'snv' })).toThrow(/chain must be an array/);
  });

  it('refuses a non-increasing raw axis and a calibration of the wrong width', () => {
    expect(() => fitChain([], [1000, 999], matrixFromRows([[1, 2]]))).toThrow(/increase strictly/);
    expect(() => fitChain([], axis, matrixFromRows([[1, 2]]))).toThrow(/2 values; the axis has 21/);
  });
});
