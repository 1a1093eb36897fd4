import { describe, expect, it } from 'vitest';
import { fitChain, type ChainSpec } from '../../core/preprocess/index.ts';
import { matrixFromRows, matrixRow, denseMatrix } from '../../core/linalg/dense-matrix.ts';
import { maxAbsDiff, pythonAvailable, runPython, seededRandom } from './python.ts';

const axis5 = [1000, 1002, 1004, 1006, 1008];

describe('SNV (Barnes, Dhanoa & Lister 1989; values in docs/check-values.md)', () => {
  it('uses the n−1 standard deviation: [1,2,3,4,5] → ±1.264911, ±0.632456, 0', () => {
    const chain = fitChain([{ step: 'snv' }], axis5, matrixFromRows([[1, 2, 3, 4, 5]]));
    const got = chain.apply([1, 2, 3, 4, 5]);
    expect(maxAbsDiff(got, [-1.264911, -0.632456, 0, 0.632456, 1.264911])).toBeLessThan(5e-7);
    // Not the n-denominator convention (±1.414214).
    expect(Math.abs(got[0]! + 1.414214)).toBeGreaterThan(0.1);
  });

  it('refuses a flat spectrum with a message instead of returning NaN', () => {
    const chain = fitChain([{ step: 'snv' }], axis5, matrixFromRows([[1, 2, 3, 4, 5]]));
    expect(() => chain.apply([2, 2, 2, 2, 2])).toThrow(/steps\[0\] \(snv\).*zero standard deviation/);
  });
});

describe('MSC (Geladi, MacDougall & Martens 1985)', () => {
  it('x = 0.5 + 2·ref gives back ref (Geladi et al. 1985)', () => {
    const ref = [0.2, 0.5, 0.9, 0.4, 0.3];
    // Calibration mean equals ref: two spectra symmetric around it.
    const cal = matrixFromRows([ref.map((v) => v + 0.1), ref.map((v) => v - 0.1)]);
    const chain = fitChain([{ step: 'msc' }], axis5, cal);
    const got = chain.apply(ref.map((v) => 0.5 + 2 * v));
    expect(maxAbsDiff(got, ref)).toBeLessThan(1e-14);
  });

  it('recovers known additive and multiplicative effects on synthetic spectra', () => {
    const rnd = seededRandom(11);
    const p = 120;
    const axis = Array.from({ length: p }, (_, j) => 1100 + 5 * j);
    const base = axis.map((l) => 0.4 + 0.3 * Math.exp(-(((l - 1450) / 40) ** 2)) + 0.2 * Math.exp(-(((l - 1940) / 60) ** 2)));
    const effects = Array.from({ length: 30 }, () => ({ a: 0.4 * (rnd() - 0.5), b: 0.6 + 0.8 * rnd() }));
    const rows = effects.map(({ a, b }) => base.map((v) => a + b * v));
    const chain = fitChain([{ step: 'msc' }], axis, matrixFromRows(rows));
    // Reference is the calibration mean: r = ā + b̄·base. Each row = a + b·base = (a − b·ā/b̄) + (b/b̄)·r.
    const aBar = effects.reduce((s, e) => s + e.a, 0) / effects.length;
    const bBar = effects.reduce((s, e) => s + e.b, 0) / effects.length;
    const r = base.map((v) => aBar + bBar * v);
    for (let i = 0; i < rows.length; i++) {
      const got = chain.apply(rows[i]!);
      expect(maxAbsDiff(got, r)).toBeLessThan(1e-12);
    }
    // A new spectrum with its own effects (outside calibration) is also corrected onto the reference.
    expect(maxAbsDiff(chain.apply(base.map((v) => -0.7 + 3.1 * v)), r)).toBeLessThan(1e-12);
  });
});

describe('select / exclude', () => {
  const axis = Array.from({ length: 11 }, (_, j) => 1000 + 10 * j); // 1000…1100
  const x = axis.map((l) => l / 1000);
  const cal = matrixFromRows([x]);
  it('select keeps several inclusive nm ranges in axis order', () => {
    const c = fitChain([{ step: 'select', ranges: [[1075, 1100], [1000, 1020]] }], axis, cal);
    expect(Array.from(c.outputAxis)).toEqual([1000, 1010, 1020, 1080, 1090, 1100]);
    expect(Array.from(c.apply(x))).toEqual([1, 1.01, 1.02, 1.08, 1.09, 1.1]);
  });
  it('exclude drops them', () => {
    const c = fitChain([{ step: 'exclude', ranges: [[1015, 1045], [1095, 1200]] }], axis, cal);
    expect(Array.from(c.outputAxis)).toEqual([1000, 1010, 1050, 1060, 1070, 1080, 1090]);
  });
});

describe.skipIf(!pythonAvailable)('against numpy on random data', () => {
  const rnd = seededRandom(3);
  const p = 90;
  const axis = Array.from({ length: p }, (_, j) => 950 + 7.3 * j + 2 * Math.sin(j)); // uneven axis
  const rows = Array.from({ length: 12 }, () => axis.map((l) => Math.cos(l / 80) + rnd()));

  it('resample equals numpy.interp', () => {
    const target = Array.from({ length: 57 }, (_, k) => axis[0]! + (k * (axis[p - 1]! - axis[0]!)) / 56);
    const c = fitChain([{ step: 'resample', axis: target }], axis, matrixFromRows(rows));
    const ref = runPython<number[][]>('out = [np.interp(inp["t"], inp["a"], r).tolist() for r in inp["rows"]]', { t: target, a: axis, rows });
    rows.forEach((r, i) => expect(maxAbsDiff(c.apply(r), ref[i]!)).toBeLessThan(1e-13));
  });

  const orders = [0, 1, 2, 3, 5];
  const detrendRef = pythonAvailable
    ? runPython<number[][][]>(
        'a = np.array(inp["a"])\nout = [[(np.array(r) - np.polyval(np.polyfit(a, r, o), a)).tolist() for r in inp["rows"]] for o in inp["orders"]]',
        { a: axis, rows, orders },
      )
    : [];
  it.each(orders)('detrend order %i equals x − polyval(polyfit(λ, x, order), λ)', (order) => {
    const c = fitChain([{ step: 'detrend', order }], axis, matrixFromRows(rows));
    const ref = detrendRef[orders.indexOf(order)]!;
    rows.forEach((r, i) => expect(maxAbsDiff(c.apply(r), ref[i]!)).toBeLessThan(1e-9));
  });

  const scaleCases = [
    [true, 'none'],
    [true, 'uv'],
    [false, 'pareto'],
    [true, 'pareto'],
  ] as const;
  const scaleRef = pythonAvailable
    ? runPython<number[][][]>(
        `X = np.array(inp["rows"]); sd = X.std(0, ddof=1)
def f(c, s):
    mu = X.mean(0) if c else 0
    return ((X - mu) / {"none": 1, "uv": sd, "pareto": np.sqrt(sd)}[s]).tolist()
out = [f(c, s) for c, s in inp["cases"]]`,
        { rows, cases: scaleCases },
      )
    : [];
  it.each(scaleCases.map((c, k) => [...c, k] as const))('scale center=%s scaling=%s equals numpy (ddof=1)', (center, scaling, k) => {
    const c = fitChain([{ step: 'scale', center, scaling }], axis, matrixFromRows(rows));
    const ref = scaleRef[k]!;
    rows.forEach((r, i) => expect(maxAbsDiff(c.apply(r), ref[i]!)).toBeLessThan(1e-12));
  });

  it('a full chain equals the same steps written in numpy/scipy', () => {
    const even = Array.from({ length: 200 }, (_, j) => 1000 + 4 * j);
    const spectra = Array.from({ length: 15 }, (_, i) => even.map((l) => 0.5 + (0.1 + 0.01 * i) * Math.sin(l / 60) + 0.05 * rnd()));
    const spec: ChainSpec = [
      { step: 'select', ranges: [[1100, 1700]] },
      { step: 'savgol', window: 15, polyorder: 2, deriv: 1 },
      { step: 'msc' },
      { step: 'detrend', order: 1 },
      { step: 'scale', center: true, scaling: 'uv' },
    ];
    const cal = matrixFromRows(spectra);
    const c = fitChain(spec, even, cal);
    const ref = runPython<number[][]>(
      `from scipy.signal import savgol_filter
a = np.array(inp["axis"]); X = np.array(inp["X"])
keep = (a >= 1100) & (a <= 1700); a = a[keep]; X = X[:, keep]
X = savgol_filter(X, 15, 2, deriv=1, delta=4.0, mode="interp", axis=1)
ref = X.mean(0)
def msc(x):
    b, a0 = np.polyfit(ref, x, 1)
    return (x - a0) / b
X = np.array([msc(x) for x in X])
X = np.array([x - np.polyval(np.polyfit(a, x, 1), a) for x in X])
X = (X - X.mean(0)) / X.std(0, ddof=1)
out = X.tolist()`,
      { axis: even, X: spectra },
    );
    const got = c.applyMatrix(cal);
    for (let i = 0; i < spectra.length; i++) expect(maxAbsDiff(matrixRow(got, i), ref[i]!)).toBeLessThan(1e-8);
  });
});

describe('apply', () => {
  const axis = Array.from({ length: 64 }, (_, j) => 1000 + 2 * j);
  const rnd = seededRandom(5);
  const rows = Array.from({ length: 6 }, () => axis.map(() => rnd()));
  const cal = matrixFromRows(rows);
  const spec: ChainSpec = [{ step: 'savgol', window: 15, polyorder: 2, deriv: 2 }, { step: 'snv' }, { step: 'scale', center: true, scaling: 'none' }];
  const chain = fitChain(spec, axis, cal);

  it('writes into the given buffer and returns it; equals applyMatrix; accepts Float32Array input', () => {
    const out = new Float64Array(chain.outputAxis.length);
    const whole = chain.applyMatrix(cal);
    for (let i = 0; i < rows.length; i++) {
      expect(chain.apply(rows[i]!, out)).toBe(out);
      expect(Array.from(out)).toEqual(Array.from(matrixRow(whole, i)));
    }
    const f32 = Float32Array.from(rows[0]!);
    expect(Array.from(chain.apply(f32))).toEqual(Array.from(chain.apply(Array.from(f32))));
  });

  it('works in place (raw === out)', () => {
    const x = Float64Array.from(rows[2]!);
    const want = chain.apply(x);
    chain.apply(x, x);
    expect(Array.from(x)).toEqual(Array.from(want));
  });

  it('refuses spectra and buffers of the wrong length', () => {
    expect(() => chain.apply(rows[0]!.slice(1))).toThrow(/63 values; the chain expects 64/);
    expect(() => chain.apply(rows[0]!, new Float64Array(3))).toThrow(/output buffer has 3 values/);
    expect(() => chain.applyMatrix(denseMatrix(2, 5))).toThrow(/5 columns/);
  });

  it('refuses NaN and Infinity in a spectrum and in the calibration, naming the wavelength', () => {
    const x = rows[0]!.slice();
    x[10] = NaN;
    expect(() => chain.apply(x)).toThrow(/raw value 10 \(1020 nm\) is NaN/);
    x[10] = -Infinity;
    expect(() => chain.apply(x)).toThrow(/is -Infinity/);
    expect(() => fitChain(spec, axis, matrixFromRows([rows[0]!, x]))).toThrow(/calibration spectrum 1, value 10 \(1020 nm\) is -Infinity/);
  });

  it('an empty chain copies', () => {
    const c = fitChain([], axis, cal);
    expect(Array.from(c.apply(rows[1]!))).toEqual(rows[1]);
  });
});
