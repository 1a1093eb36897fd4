import { describe, expect, it } from 'vitest';
import { savgolCoefficients, savgolAllPositions, fitChain } from '../../core/preprocess/index.ts';
import { matrixFromRows } from '../../core/linalg/dense-matrix.ts';
import { maxAbsDiff, pythonAvailable, runPython, seededRandom } from './python.ts';
import fixture from './fixtures/savgol-scipy.json' with { type: 'json' };

// Savitzky & Golay 1964 (Anal. Chem. 36:1627) tables as corrected by Steinier, Termonia & Deltour
// 1972 (Anal. Chem. 44:1906); values as printed there (docs/check-values.md). Order i = −m…m.
const TABLE: { window: number; polyorder: number; deriv: number; coef: number[]; norm: number }[] = [
  { window: 5, polyorder: 2, deriv: 0, coef: [-3, 12, 17, 12, -3], norm: 35 },
  { window: 5, polyorder: 3, deriv: 0, coef: [-3, 12, 17, 12, -3], norm: 35 },
  { window: 7, polyorder: 2, deriv: 0, coef: [-2, 3, 6, 7, 6, 3, -2], norm: 21 },
  { window: 9, polyorder: 3, deriv: 0, coef: [-21, 14, 39, 54, 59, 54, 39, 14, -21], norm: 231 },
  { window: 5, polyorder: 2, deriv: 1, coef: [-2, -1, 0, 1, 2], norm: 10 },
  { window: 7, polyorder: 2, deriv: 1, coef: [-3, -2, -1, 0, 1, 2, 3], norm: 28 },
  { window: 5, polyorder: 3, deriv: 1, coef: [1, -8, 0, 8, -1], norm: 12 },
  { window: 7, polyorder: 3, deriv: 1, coef: [22, -67, -58, 0, 58, 67, -22], norm: 252 },
  { window: 5, polyorder: 2, deriv: 2, coef: [2, -1, -2, -1, 2], norm: 7 },
  { window: 7, polyorder: 3, deriv: 2, coef: [5, 0, -3, -4, -3, 0, 5], norm: 42 },
  { window: 9, polyorder: 2, deriv: 2, coef: [28, 7, -8, -17, -20, -17, -8, 7, 28], norm: 462 },
];

describe('Savitzky–Golay coefficients vs the published tables (Savitzky & Golay 1964; Steinier et al. 1972)', () => {
  it.each(TABLE)('window $window, polyorder $polyorder, deriv $deriv', ({ window, polyorder, deriv, coef, norm }) => {
    // The tables give the derivative per unit sample step (coefficient/norm).
    const got = savgolCoefficients(window, polyorder, deriv);
    const want = coef.map((c) => c / norm);
    expect(maxAbsDiff(got, want)).toBeLessThan(1e-13);
  });
});

describe.skipIf(!pythonAvailable)('Savitzky–Golay vs scipy.signal (savgol_coeffs use="dot", savgol_filter mode="interp")', () => {
  const cases: [number, number, number][] = [];
  for (const w of [3, 5, 7, 11, 15, 21, 31, 51]) {
    for (const p of [0, 1, 2, 3, 4, 6]) {
      if (p >= w) continue;
      for (const d of [0, 1, 2]) if (d <= p) cases.push([w, p, d]);
    }
  }

  it(`centred coefficients for ${cases.length} (window, polyorder, deriv) cases`, () => {
    const ref = runPython<number[][]>(
      'from scipy.signal import savgol_coeffs\nout = [savgol_coeffs(w, p, deriv=d, use="dot").tolist() for (w, p, d) in inp]',
      cases,
    );
    cases.forEach(([w, p, d], k) => {
      const got = savgolCoefficients(w, p, d);
      const scale = Math.max(...ref[k]!.map(Math.abs));
      // scipy solves the unscaled Vandermonde system; its own rounding reaches 2.5e-10 (relative)
      // at window 31 and 2.7e-8 at window 51, order 6, against exact rationals (measured): 1e-10 up to window 21, 1e-7 beyond, and the exact check below.
      expect(maxAbsDiff(got, ref[k]!) / scale, `w=${w} p=${p} d=${d}`).toBeLessThan(w <= 21 ? 1e-10 : 1e-7);
    });
  });

  it('centred and edge coefficients equal the exact rational least-squares solution (python fractions)', () => {
    const exactCases: [number, number, number, number][] = [[31, 6, 0, 15], [31, 6, 2, 0], [51, 6, 1, 3], [15, 2, 2, 14], [9, 4, 2, 7], [21, 5, 1, 10]];
    const ref = runPython<number[][]>(
      `from fractions import Fraction as F
def exact(w, p, d, pos):
    m = p + 1
    A = [[F(j - pos) ** k for k in range(m)] for j in range(w)]
    M = [[sum(A[i][a] * A[i][b] for i in range(w)) for b in range(m)] + [F(int(a == c)) for c in range(m)] for a in range(m)]
    for c in range(m):
        r0 = next(r for r in range(c, m) if M[r][c] != 0); M[c], M[r0] = M[r0], M[c]
        pv = M[c][c]; M[c] = [v / pv for v in M[c]]
        for r in range(m):
            if r != c and M[r][c] != 0:
                f = M[r][c]; M[r] = [a - f * b for a, b in zip(M[r], M[c])]
    fact = 1
    for t in range(d): fact *= d - t
    return [float(fact * sum(M[d][m + k] * A[i][k] for k in range(m))) for i in range(w)]
out = [exact(*c) for c in inp]`,
      exactCases,
    );
    exactCases.forEach(([w, p, d, pos], k) => {
      const all = savgolAllPositions(w, p, d);
      const got = all.subarray(pos * w, (pos + 1) * w);
      const scale = Math.max(...ref[k]!.map(Math.abs));
      expect(maxAbsDiff(got, ref[k]!) / scale, `w=${w} p=${p} d=${d} pos=${pos}`).toBeLessThan(1e-12);
    });
  });

  it('filtering random spectra on a 2 nm axis, edges included, equals savgol_filter(mode="interp", delta=2)', () => {
    const rnd = seededRandom(7);
    const n = 200;
    const axis = Array.from({ length: n }, (_, i) => 1100 + 2 * i);
    const x = Array.from({ length: n }, (_, i) => Math.sin(i / 9) + 0.3 * rnd());
    const filt: [number, number, number][] = [[5, 2, 0], [15, 2, 2], [15, 3, 1], [21, 4, 2], [7, 3, 0], [31, 5, 1], [11, 2, 1], [199, 3, 2]];
    const ref = runPython<number[][]>(
      'from scipy.signal import savgol_filter\nx = np.array(inp["x"])\nout = [savgol_filter(x, w, p, deriv=d, delta=2.0, mode="interp").tolist() for (w, p, d) in inp["f"]]',
      { x, f: filt },
    );
    filt.forEach(([w, p, d], k) => {
      const chain = fitChain([{ step: 'savgol', window: w, polyorder: p, deriv: d as 0 | 1 | 2 }], axis, matrixFromRows([x]));
      const got = chain.apply(x);
      const scale = Math.max(...ref[k]!.map(Math.abs));
      expect(maxAbsDiff(got, ref[k]!) / scale, `w=${w} p=${p} d=${d}`).toBeLessThan(1e-10);
      // No silent zeros at the ends: the edge values follow the signal.
      expect(got[0]).not.toBe(0);
      expect(got[n - 1]).not.toBe(0);
    });
  });
});

describe('Savitzky–Golay on polynomials (exactness, from the definition)', () => {
  it('reproduces a cubic and its derivatives exactly, ends included (Δλ = 0.5 nm)', () => {
    const n = 40;
    const axis = Array.from({ length: n }, (_, i) => 1000 + 0.5 * i);
    const f = (l: number) => 0.001 * (l - 1010) ** 3 - 0.02 * (l - 1010) ** 2 + 0.5 * l;
    const f1 = (l: number) => 0.003 * (l - 1010) ** 2 - 0.04 * (l - 1010) + 0.5;
    const f2 = (l: number) => 0.006 * (l - 1010) - 0.04;
    const x = axis.map(f);
    const cal = matrixFromRows([x]);
    for (const [d, g] of [[0, f], [1, f1], [2, f2]] as const) {
      const got = fitChain([{ step: 'savgol', window: 9, polyorder: 3, deriv: d }], axis, cal).apply(x);
      expect(maxAbsDiff(got, axis.map(g))).toBeLessThan(1e-8);
    }
  });
});

// Committed fixture written by scripts/fixtures/savgol-scipy.py (scipy version recorded in the file),
// so the scipy check also runs where python3 is absent. Tolerance 1e-10 relative (windows ≤ 31).

describe(`Savitzky–Golay vs committed scipy ${fixture.scipy} fixture`, () => {
  it(`${fixture.coefficients.length} centred coefficient sets`, () => {
    for (const c of fixture.coefficients) {
      const got = savgolCoefficients(c.window, c.polyorder, c.deriv);
      const scale = Math.max(...c.coefficients.map(Math.abs));
      expect(maxAbsDiff(got, c.coefficients) / scale, `w=${c.window} p=${c.polyorder} d=${c.deriv}`).toBeLessThan(1e-10);
    }
  });
  it(`${fixture.filters.length} filtered signals, ends included (mode='interp', delta = 2 nm)`, () => {
    const { axis, x } = fixture.signal;
    for (const f of fixture.filters) {
      const chain = fitChain([{ step: 'savgol', window: f.window, polyorder: f.polyorder, deriv: f.deriv as 0 | 1 | 2 }], axis, matrixFromRows([x]));
      const scale = Math.max(...f.output.map(Math.abs));
      expect(maxAbsDiff(chain.apply(x), f.output) / scale, `w=${f.window} p=${f.polyorder} d=${f.deriv}`).toBeLessThan(1e-10);
    }
  });
});
