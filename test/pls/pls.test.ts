import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { matrixFromRows, denseMatrix } from '../../core/linalg/dense-matrix.ts';
import { fitPls1, createPls1Predictor, crossValidatePls1, regressionMetrics, loadPls1 } from '../../core/pls/index.ts';
import { qLimitBoxMoments } from '../../core/limits/index.ts';
import { maxAbsDiff, pythonAvailable, runPython, seededRandom } from '../preprocess/python.ts';

function gauss(rnd: () => number): number {
  return Math.sqrt(-2 * Math.log(1 - rnd())) * Math.cos(2 * Math.PI * rnd());
}

/** Spectra-like data: 4 latent factors on p variables, plus noise; y from the factors. */
function makeData(seed: number, n: number, p: number) {
  const rnd = seededRandom(seed);
  const load = Array.from({ length: 4 }, (_, k) => Array.from({ length: p }, (_, j) => Math.sin((j + 1) * (k + 1) * 0.37) + 0.2 * gauss(rnd)));
  const rows: number[][] = [];
  const y: number[] = [];
  for (let i = 0; i < n; i++) {
    const z = [3 * gauss(rnd), 2 * gauss(rnd), gauss(rnd), 0.5 * gauss(rnd)];
    rows.push(load[0]!.map((_, j) => 1 + z.reduce((s, zk, k) => s + zk * load[k]![j]!, 0) + 0.05 * gauss(rnd)));
    y.push(10 + 0.8 * z[0]! - 0.5 * z[1]! + 1.2 * z[2]! + 0.3 * z[3]! + 0.1 * gauss(rnd));
  }
  return { rows, y };
}

const NUMPY_NIPALS = `
from scipy.stats import norm, f as fdist, chi2
def nipals(cs):
    X = np.array(cs["X"]); y = np.array(cs["y"]); Xn = np.array(cs["Xn"]); A = cs["A"]; n, p = X.shape
    c = cs.get("center", True)
    xm = X.mean(0) if c else np.zeros(p); ym = y.mean() if c else 0.0; E = X - xm; f = y - ym
    W, P, Q, T = [], [], [], []
    for a in range(A):
        w = E.T @ f; w = w / np.linalg.norm(w)
        t = E @ w; tt = t @ t
        pa = E.T @ t / tt; qa = (f @ t) / tt
        E = E - np.outer(t, pa); f = f - qa * t
        W.append(w); P.append(pa); Q.append(qa); T.append(t)
    W = np.array(W).T; P = np.array(P).T; Q = np.array(Q); T = np.array(T).T
    R = W @ np.linalg.inv(P.T @ W)
    b = R @ Q; b0 = ym - xm @ b
    Tn = (Xn - xm) @ R
    t2 = ((Tn ** 2) / T.var(0, ddof=1)).sum(1)
    q = (((Xn - xm) - Tn @ P.T) ** 2).sum(1)
    ev = np.linalg.eigvalsh(E.T @ E / (n - 1))
    th = [float((ev ** i).sum()) for i in (1, 2, 3)]
    h0 = 1 - 2 * th[0] * th[2] / (3 * th[1] ** 2)
    cz = norm.ppf(0.99)
    jm = th[0] * (cz * np.sqrt(2 * th[1] * h0 ** 2) / th[0] + 1 + th[1] * h0 * (h0 - 1) / th[0] ** 2) ** (1 / h0)
    box = th[1] / th[0] * chi2.ppf(0.99, th[0] ** 2 / th[1])
    # Helland (1988): b_A = K (Kᵀ XᵀX K)⁻¹ Kᵀ Xᵀy with the Krylov basis K = [s, XᵀX s, …], s = Xᵀy (centred).
    Xc = X - xm; yc = y - ym; S = Xc.T @ Xc; s = Xc.T @ yc
    K = np.column_stack([np.linalg.matrix_power(S, k) @ s for k in range(A)])
    bk = K @ np.linalg.solve(K.T @ S @ K, K.T @ s)
    res = {"b": b.tolist(), "b0": float(b0), "yhat": (b0 + Xn @ b).tolist(), "t2": t2.tolist(), "q": q.tolist(), "theta": th,
           "t2lim": float(A * (n - 1) * (n + 1) / (n * (n - A)) * fdist.ppf(0.99, A, n - A)), "jm": float(jm), "box": float(box),
           "bk": bk.tolist(), "W": W.tolist(), "P": P.tolist(), "Q": Q.tolist()}
    return res
out = [nipals(cs) for cs in inp]
`;

const rel = (a: ArrayLike<number>, b: ArrayLike<number>) => maxAbsDiff(a, b) / Math.max(...Array.from(b, Math.abs));

describe.skipIf(!pythonAvailable)('PLS1 vs a numpy NIPALS written in the test (same data)', () => {
  const { rows, y } = makeData(42, 40, 25);
  const fresh = makeData(43, 12, 25).rows;
  // One python run for every case below (numpy/scipy start-up dominates).
  const cases = [1, 2, 4, 6].map((A) => ({ X: rows, y, Xn: fresh, A, center: true })).concat([{ X: rows, y, Xn: fresh, A: 3, center: false }]);
  const refs = pythonAvailable ? runPython<Record<string, number[] & number>[]>(NUMPY_NIPALS, cases) : [];
  it.each([1, 2, 4, 6])('%i component(s): coefficients, predictions, T², Q, θ and limits to 1e-8', (A) => {
    const m = fitPls1(matrixFromRows(rows), y, { components: A });
    const ref = refs[[1, 2, 4, 6].indexOf(A)]!;
    expect(rel(m.coefficients, ref.b)).toBeLessThan(1e-8);
    expect(Math.abs(m.intercept - ref.b0) / Math.abs(ref.b0)).toBeLessThan(1e-8);
    const pr = createPls1Predictor(m);
    const got = fresh.map((x) => {
      const r = pr.predict(x);
      return { y: r.y, t2: r.t2, q: r.q };
    });
    expect(rel(got.map((g) => g.y), ref.yhat)).toBeLessThan(1e-8);
    expect(rel(got.map((g) => g.t2), ref.t2)).toBeLessThan(1e-8);
    expect(rel(got.map((g) => g.q), ref.q)).toBeLessThan(1e-8);
    expect(rel(m.residualTheta!, ref.theta)).toBeLessThan(1e-8);
    expect(Math.abs(m.limits.t2Limit - ref.t2lim) / ref.t2lim).toBeLessThan(1e-8);
    const qRef = m.limits.qMethod === 'q-jackson-mudholkar' ? ref.jm : ref.box;
    expect(Math.abs(m.limits.qLimit - qRef) / qRef).toBeLessThan(1e-8);
    // Weights and loadings column by column (NIPALS fixes the sign through Xᵀy).
    const Wn = (ref.W as unknown as number[][]).flat();
    expect(rel(m.weights.data, Wn)).toBeLessThan(1e-8);
    expect(rel(m.loadings.data, (ref.P as unknown as number[][]).flat())).toBeLessThan(1e-8);
    // A different route to the same regression vector: Helland's Krylov form (well conditioned for small A).
    if (A <= 4) expect(rel(m.coefficients, ref.bk)).toBeLessThan(1e-6);
  });

  it('without centring (center: false): coefficients, predictions, T² and Q to 1e-8', () => {
    const m = fitPls1(matrixFromRows(rows), y, { components: 3, center: false });
    expect(m.intercept).toBe(0);
    expect(Array.from(m.xMean).every((v) => v === 0)).toBe(true);
    const ref = refs[4]!;
    expect(rel(m.coefficients, ref.b)).toBeLessThan(1e-8);
    const pr = createPls1Predictor(m);
    expect(rel(fresh.map((x) => pr.predict(x).y), ref.yhat)).toBeLessThan(1e-8);
    expect(rel(fresh.map((x) => pr.predict(x).t2), ref.t2)).toBeLessThan(1e-8);
    expect(rel(fresh.map((x) => pr.predict(x).q), ref.q)).toBeLessThan(1e-8);
  });
});

describe('PLS1 properties', () => {
  const { rows, y } = makeData(7, 30, 20);
  const X = matrixFromRows(rows);

  it('with as many components as the rank, the calibration is fitted exactly (fast-check over rows)', () => {
    const small = makeData(9, 8, 20);
    const m = fitPls1(matrixFromRows(small.rows), small.y, { components: 7 });
    const pr = createPls1Predictor(m);
    fc.assert(
      fc.property(fc.integer({ min: 0, max: 7 }), (i) => Math.abs(pr.predict(small.rows[i]!).y - small.y[i]!) < 1e-8),
      { numRuns: 30, seed: 4 },
    );
  });

  it('T², Q ≥ 0 and a calibration row has T² = Σ t_a²/s_a² of its own NIPALS scores (fast-check)', () => {
    const m = fitPls1(X, y, { components: 3 });
    const pr = createPls1Predictor(m);
    // The scores of the calibration rows have variance s_a² by construction: mean T² = A(n−1)/n.
    let sum = 0;
    for (const r of rows) sum += pr.predict(r).t2;
    expect(Math.abs(sum / rows.length - (3 * (rows.length - 1)) / rows.length)).toBeLessThan(1e-9);
    fc.assert(
      fc.property(fc.array(fc.double({ min: -10, max: 10, noNaN: true }), { minLength: 20, maxLength: 20 }), (x) => {
        const r = pr.predict(x);
        return r.t2 >= 0 && r.q >= 0 && Number.isFinite(r.y);
      }),
      { numRuns: 100, seed: 5 },
    );
  });

  it('flags a spectrum far outside the calibration', () => {
    const m = fitPls1(X, y, { components: 3 });
    const pr = createPls1Predictor(m);
    const flaggedCal = rows.filter((r) => pr.predict(r).extrapolating).length;
    expect(flaggedCal).toBeLessThanOrEqual(2);
    expect(pr.predict(rows[0]!.map((v, j) => v + (j === 5 ? 8 : 0))).extrapolating).toBe(true);
    expect(pr.predict(rows[0]!.map((v) => 8 * v)).extrapolating).toBe(true);
  });

  it('toJSON → JSON text → loadPls1 predicts bit-identically', () => {
    const m = fitPls1(X, y, { components: 4 });
    const back = loadPls1(JSON.parse(JSON.stringify(m.toJSON())));
    const a = createPls1Predictor(m);
    const b = createPls1Predictor(back);
    for (const r of makeData(8, 10, 20).rows) {
      const ra = { ...a.predict(r) };
      const rb = b.predict(r);
      expect(Object.is(ra.y, rb.y) && Object.is(ra.t2, rb.t2) && Object.is(ra.q, rb.q)).toBe(true);
    }
    const broken = m.toJSON();
    broken.coefficients = broken.coefficients.slice(1);
    expect(() => loadPls1(broken)).toThrow(/coefficients length is 19; expected 20/);
    expect(() => loadPls1({ ...m.toJSON(), weights: { rows: 2, cols: 2, data: [1] } })).toThrow(/weights/);
  });

  it('large sets (min(n, p) > 1024): Q limit from the moments of the calibration Q (Nomikos & MacGregor 1995)', () => {
    const rnd = seededRandom(99);
    const n = 1030;
    const p = 1030;
    const Xl = denseMatrix(n, p);
    const yl = new Float64Array(n);
    for (let i = 0; i < n; i++) {
      const z1 = gauss(rnd);
      const z2 = gauss(rnd);
      yl[i] = z1 + 0.5 * z2;
      for (let j = 0; j < p; j++) Xl.data[i * p + j] = z1 * Math.sin(j / 40) + z2 * Math.cos(j / 90) + 0.1 * gauss(rnd);
    }
    const m = fitPls1(Xl, yl, { components: 2, confidence: 0.95 });
    expect(m.residualTheta).toBeNull();
    expect(m.limits.qMethod).toBe('q-box-moments');
    const pr = createPls1Predictor(m);
    const q = new Float64Array(n);
    for (let i = 0; i < n; i++) q[i] = pr.predict(Xl.data.subarray(i * p, (i + 1) * p)).q;
    expect(Math.abs(m.limits.qLimit - qLimitBoxMoments(q, 0.95)) / m.limits.qLimit).toBeLessThan(1e-9);
    // About 5 % of the calibration rows lie above a 95 % limit (binomial 99.9 % band for n = 1030, scipy binom.ppf: 2.9 %–7.4 %).
    const above = Array.from(q).filter((v) => v > m.limits.qLimit).length / n;
    expect(above).toBeGreaterThan(0.029);
    expect(above).toBeLessThan(0.0738);
    expect(loadPls1(JSON.parse(JSON.stringify(m.toJSON()))).residualTheta).toBeNull();
  });

  it('refuses impossible requests with a message', () => {
    expect(() => fitPls1(X, y.slice(1), { components: 2 })).toThrow(/y has 29 values; X has 30 rows/);
    expect(() => fitPls1(X, y, { components: 21 })).toThrow(/at most 20/);
    expect(() => fitPls1(matrixFromRows(rows.slice(0, 3)), y.slice(0, 3), { components: 3 })).toThrow(/at most 2/);
    const bad = matrixFromRows(rows);
    bad.data[7] = NaN;
    expect(() => fitPls1(bad, y, { components: 2 })).toThrow(/X\[0\]\[7\] is not a finite number/);
    expect(() => fitPls1(X, new Array(30).fill(1), { components: 1 })).toThrow(/no further covariance/);
    expect(() => crossValidatePls1(X, y, { maxComponents: 3, folds: 1 })).toThrow(/folds/);
  });
});

describe('cross-validation', () => {
  const { rows, y } = makeData(11, 36, 20);
  const X = matrixFromRows(rows);

  it('k = n contiguous folds equal leave-one-out; k-fold predictions equal refits by hand', () => {
    const loo = crossValidatePls1(X, y, { maxComponents: 5, folds: 'loo' });
    const kn = crossValidatePls1(X, y, { maxComponents: 5, folds: 36 });
    expect(kn.rmsecv).toEqual(loo.rmsecv);
    const k4 = crossValidatePls1(X, y, { maxComponents: 3, folds: 4, segments: 'interleaved' });
    // Segment 1 of 4 interleaved = rows 1, 5, 9, …
    const test = rows.map((_, i) => i).filter((i) => i % 4 === 1);
    const train = rows.map((_, i) => i).filter((i) => i % 4 !== 1);
    const m = fitPls1(matrixFromRows(train.map((i) => rows[i]!)), train.map((i) => y[i]!), { components: 2 });
    const pr = createPls1Predictor(m);
    for (const i of test) expect(Math.abs(k4.predictions[1]![i]! - pr.predict(rows[i]!).y)).toBeLessThan(1e-10);
  });

  it("folds 'groups' leaves each group out once (here the same as 4 interleaved segments)", () => {
    const groups = rows.map((_, i) => 100 + (i % 4));
    const g = crossValidatePls1(X, y, { maxComponents: 3, folds: 'groups', groups });
    const k4 = crossValidatePls1(X, y, { maxComponents: 3, folds: 4, segments: 'interleaved' });
    expect(g.rmsecv).toEqual(k4.rmsecv);
    expect(g.method).toBe('leave-one-group-out (4 groups)');
    expect(() => crossValidatePls1(X, y, { maxComponents: 3, folds: 'groups' })).toThrow(/group label for each of the 36 samples/);
    expect(() => crossValidatePls1(X, y, { maxComponents: 3, folds: 'groups', groups: rows.map(() => 1) })).toThrow(/at least 2 distinct groups/);
  });

  it('recommends a count by the one-standard-error rule: 4 latent factors in the data → 3 or 4', () => {
    const cv = crossValidatePls1(X, y, { maxComponents: 8, folds: 6 });
    expect(cv.rmsecv.length).toBe(8);
    expect(cv.rmsecv0).toBeGreaterThan(cv.rmsecv[0]!);
    expect([3, 4]).toContain(cv.recommended);
    expect(cv.method).toBe('6-fold contiguous');
  });
});

describe('regressionMetrics', () => {
  it('hand-computed case (definitions: RMSEP, bias = mean(ŷ − y), R² = 1 − SSE/SST)', () => {
    const m = regressionMetrics([1, 2, 3, 4], [1.5, 2, 2.5, 5]);
    // e = (0.5, 0, −0.5, 1): SSE = 1.5, RMSEP = √0.375, bias = 0.25, SST = 5, R² = 0.7
    expect(m.rmsep).toBeCloseTo(Math.sqrt(0.375), 15);
    expect(m.bias).toBeCloseTo(0.25, 15);
    expect(m.r2).toBeCloseTo(0.7, 15);
    // SEP: sd of (0.25, −0.25, −0.75, 0.75) with n − 1 = √(1.25/3)
    expect(m.sep).toBeCloseTo(Math.sqrt(1.25 / 3), 15);
    expect(() => regressionMetrics([1, 2], [1])).toThrow(/2 reference values but 1 predictions/);
  });
  void denseMatrix;
});
