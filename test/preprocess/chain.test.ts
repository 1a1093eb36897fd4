import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { fitChain, loadChain, type ChainSpec, type StepSpec } from '../../core/preprocess/index.ts';
import { matrixFromRows } from '../../core/linalg/dense-matrix.ts';
import { seededRandom } from './python.ts';

const p = 80;
const axis = Array.from({ length: p }, (_, j) => 1100 + 10 * j); // 1100…1890 nm

function bitsEqual(a: ArrayLike<number>, b: ArrayLike<number>): boolean {
  if (a.length !== b.length) return false;
  for (let i = 0; i < a.length; i++) if (!Object.is(a[i], b[i])) return false;
  return true;
}

const stepArb: fc.Arbitrary<StepSpec> = fc.oneof(
  fc.constant<StepSpec>({ step: 'snv' }),
  fc.constant<StepSpec>({ step: 'msc' }),
  fc.integer({ min: 0, max: 3 }).map((order): StepSpec => ({ step: 'detrend', order })),
  fc
    .tuple(fc.integer({ min: 1, max: 10 }), fc.integer({ min: 0, max: 6 }), fc.integer({ min: 0, max: 2 }))
    .filter(([h, po, d]) => po < 2 * h + 1 && d <= po)
    .map(([h, po, d]): StepSpec => ({ step: 'savgol', window: 2 * h + 1, polyorder: po, deriv: d as 0 | 1 | 2 })),
  fc
    .tuple(fc.boolean(), fc.constantFrom('none', 'uv', 'pareto') as fc.Arbitrary<'none' | 'uv' | 'pareto'>)
    .map(([center, scaling]): StepSpec => ({ step: 'scale', center, scaling })),
  fc.constant<StepSpec>({ step: 'exclude', ranges: [[1400, 1420]] }),
);

describe('fitted chain JSON round trip', () => {
  it('property: toJSON → JSON text → loadChain gives bit-identical output (fast-check)', () => {
    fc.assert(
      fc.property(fc.array(stepArb, { minLength: 1, maxLength: 5 }), fc.integer({ min: 1, max: 1e6 }), (steps, seed) => {
        // A savgol after an exclude would see a gap: put the exclude last.
        const spec: ChainSpec = [...steps.filter((s) => s.step !== 'exclude'), ...steps.filter((s) => s.step === 'exclude').slice(0, 1)];
        const rnd = seededRandom(seed);
        const rows = Array.from({ length: 8 }, (_, i) => axis.map((l) => 0.3 + 0.1 * i + Math.sin(l / (50 + 5 * i)) + 0.05 * rnd()));
        const chain = fitChain(spec, axis, matrixFromRows(rows));
        const text = JSON.stringify(chain.toJSON());
        const loaded = loadChain(JSON.parse(text));
        expect(JSON.stringify(loaded.toJSON())).toBe(text);
        const x = axis.map((l) => 0.5 + Math.cos(l / 70) + 0.05 * rnd());
        return bitsEqual(chain.apply(x), loaded.apply(x)) && bitsEqual(chain.outputAxis, loaded.outputAxis);
      }),
      { numRuns: 60, seed: 20260101 },
    );
  });

  it('loadChain refuses a damaged document with the path', () => {
    const rows = [axis.map((l) => Math.sin(l / 50)), axis.map((l) => Math.cos(l / 50))];
    const json = fitChain([{ step: 'msc' }, { step: 'scale', center: true, scaling: 'none' }], axis, matrixFromRows(rows)).toJSON();
    const bad1 = structuredClone(json) as { fitted: unknown[] };
    bad1.fitted[0] = { reference: [1, 'x'] };
    expect(() => loadChain(bad1)).toThrow(/fitted\.0/);
    const bad2 = structuredClone(json);
    bad2.fitted[0] = { reference: [1, 2, 3] };
    expect(() => loadChain(bad2)).toThrow(/steps\[0\] \(msc\): stored reference has 3 values; the axis entering the step has 80/);
    const bad3 = structuredClone(json);
    bad3.spec[1] = { step: 'scale', center: true, scaling: 'uv' };
    expect(() => loadChain(bad3)).toThrow(/scaling='uv' but the stored state lacks a scale/);
    const bad4 = structuredClone(json);
    bad4.outputAxis = bad4.outputAxis.slice(1);
    expect(() => loadChain(bad4)).toThrow(/output axis does not match/);
    expect(() => loadChain({ ...json, format: 'other' })).toThrow(/format/);
  });
});

describe('properties of the steps (fast-check)', () => {
  const spectrum = fc.array(fc.double({ min: -100, max: 100, noNaN: true }), { minLength: p, maxLength: p }).filter((x) => {
    const m = x.reduce((s, v) => s + v, 0) / x.length;
    return x.some((v) => Math.abs(v - m) > 1e-6);
  });

  it('SNV output has mean 0 and standard deviation 1 (n−1)', () => {
    const chain = fitChain([{ step: 'snv' }], axis, matrixFromRows([axis]));
    fc.assert(
      fc.property(spectrum, (x) => {
        const y = chain.apply(x);
        const mean = y.reduce((s, v) => s + v, 0) / p;
        const sd = Math.sqrt(y.reduce((s, v) => s + (v - mean) ** 2, 0) / (p - 1));
        return Math.abs(mean) < 1e-9 && Math.abs(sd - 1) < 1e-9;
      }),
      { numRuns: 200, seed: 7 },
    );
  });

  it('SNV and MSC ignore an offset and a positive gain on the input', () => {
    const rows = [axis.map((l) => Math.sin(l / 60)), axis.map((l) => 0.2 + 1.3 * Math.sin(l / 60) + 0.01 * Math.cos(l / 7))];
    const snv = fitChain([{ step: 'snv' }], axis, matrixFromRows(rows));
    const msc = fitChain([{ step: 'msc' }], axis, matrixFromRows(rows));
    fc.assert(
      fc.property(spectrum, fc.double({ min: -5, max: 5, noNaN: true }), fc.double({ min: 0.1, max: 10, noNaN: true }), (x, a, b) => {
        const x2 = x.map((v) => a + b * v);
        const d1 = snv.apply(x).reduce((m, v, j) => Math.max(m, Math.abs(v - snv.apply(x2)[j]!)), 0);
        const r1 = msc.apply(x);
        const r2 = msc.apply(x2);
        const scale = Math.max(1, ...Array.from(r1, Math.abs));
        const d2 = r1.reduce((m, v, j) => Math.max(m, Math.abs(v - r2[j]!)), 0) / scale;
        return d1 < 1e-8 && d2 < 1e-8;
      }),
      { numRuns: 100, seed: 9 },
    );
  });

  it('detrend of order k removes any polynomial of degree ≤ k exactly and leaves the residual orthogonal', () => {
    const chain = fitChain([{ step: 'detrend', order: 2 }], axis, matrixFromRows([axis]));
    fc.assert(
      fc.property(fc.tuple(fc.double({ min: -3, max: 3, noNaN: true }), fc.double({ min: -3, max: 3, noNaN: true }), fc.double({ min: -3, max: 3, noNaN: true })), ([c0, c1, c2]) => {
        const y = chain.apply(axis.map((l) => c0 + c1 * ((l - 1500) / 400) + c2 * ((l - 1500) / 400) ** 2));
        return y.every((v) => Math.abs(v) < 1e-12);
      }),
      { numRuns: 100, seed: 3 },
    );
  });
});
