/**
 * Trimmed score regression (core/pca/tsr-projector.ts) against numpy: scripts/fixtures/tsr-numpy.py
 * computes TSR as its name says (PCA by numpy.linalg.eigh, then least squares of the calibration
 * scores on the trimmed calibration scores; Arteaga & Ferrer 2002, J. Chemometrics 16:408–418) and
 * the closed form with the isotropic residual covariance the monitor uses.
 */
import { spawnSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { fitPca, createProjector } from '../../core/pca/index.ts';
import { createTsrProjector } from '../../core/pca/tsr-projector.ts';
import { lowRankData, sampleRows } from '../pca/synthetic.ts';

const SCRIPT = fileURLToPath(new URL('../../scripts/fixtures/tsr-numpy.py', import.meta.url));

interface Route { scores: number[]; t2: number; q: number }
interface NumpyOut { numpy: string; eigenvalues: number[]; loadings: number[][]; theta1: number; results: { regression: Route; isotropic: Route }[] }

function runNumpy(input: unknown): NumpyOut {
  const r = spawnSync('python3', [SCRIPT], { input: JSON.stringify(input), encoding: 'utf8', maxBuffer: 64 * 1024 * 1024 });
  if (r.status !== 0) throw new Error(`python3 ${SCRIPT} failed (${r.status}): ${r.stderr}`);
  return JSON.parse(r.stdout) as NumpyOut;
}

function rel(a: number, b: number): number {
  return Math.abs(a - b) / Math.max(1, Math.abs(b));
}

describe('trimmed score regression against numpy', () => {
  const n = 80;
  const p = 40;
  const A = 4;
  const { X, directions } = lowRankData(n, p, [4, 2.5, 1.5, 0.8], 0.1, 7);
  const model = fitPca(X, { components: A, center: true, seed: 1 });
  const fresh = sampleRows(3, p, directions, [4, 2.5, 1.5, 0.8], 0.1, 99);
  const rows = (m: { data: Float64Array; rows: number; cols: number }) => Array.from({ length: m.rows }, (_, i) => Array.from(m.data.subarray(i * m.cols, (i + 1) * m.cols)));
  const xs = rows(fresh);
  const patterns = [[17], [3, 4, 5, 6, 7], [0, 9, 13, 21, 22, 30, 38, 39], []];
  const cases = xs.flatMap((x) => patterns.map((miss) => ({ x, miss })));
  const ref = runNumpy({ X: rows(X), A, x: cases.map((c) => c.x), missing: cases.map((c) => c.miss) });

  // The calibration covariance (n − 1 denominator) for the full-covariance route.
  const S = new Float64Array(p * p);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < p; j++) {
      const dj = X.data[i * p + j]! - model.mean[j]!;
      for (let k = 0; k < p; k++) S[j * p + k] += (dj * (X.data[i * p + k]! - model.mean[k]!)) / (n - 1);
    }
  }

  it('uses the same PCA as numpy.linalg.eigh (eigenvalues, loadings, θ1)', () => {
    for (let a = 0; a < A; a++) expect(rel(model.eigenvalues[a]!, ref.eigenvalues[a]!)).toBeLessThan(1e-9);
    for (let j = 0; j < p; j++) for (let a = 0; a < A; a++) expect(Math.abs(model.loadings.data[j * A + a]! - ref.loadings[j]![a]!)).toBeLessThan(1e-9);
    expect(rel(model.residualTheta[0], ref.theta1)).toBeLessThan(1e-9);
  });

  it('with the calibration covariance equals the least-squares regression on trimmed scores', () => {
    const tsr = createTsrProjector(model, { covariance: S });
    const mask = new Uint8Array(p);
    cases.forEach((c, i) => {
      mask.fill(0);
      for (const j of c.miss) mask[j] = 1;
      const r = tsr.project(c.x, mask);
      const want = ref.results[i]!.regression;
      expect(r.ok).toBe(true);
      expect(r.missing).toBe(c.miss.length);
      for (let a = 0; a < A; a++) expect(rel(r.scores[a]!, want.scores[a]!)).toBeLessThan(1e-9);
      expect(rel(r.t2, want.t2)).toBeLessThan(1e-9);
      expect(rel(r.q, want.q)).toBeLessThan(1e-9);
    });
  });

  it('with the isotropic residual covariance (the monitor’s) equals numpy’s closed form', () => {
    const tsr = createTsrProjector(model);
    const mask = new Uint8Array(p);
    cases.forEach((c, i) => {
      mask.fill(0);
      for (const j of c.miss) mask[j] = 1;
      const r = tsr.project(c.x, mask);
      const want = ref.results[i]!.isotropic;
      for (let a = 0; a < A; a++) expect(rel(r.scores[a]!, want.scores[a]!)).toBeLessThan(1e-9);
      expect(rel(r.t2, want.t2)).toBeLessThan(1e-9);
      expect(rel(r.q, want.q)).toBeLessThan(1e-9);
    });
  });

  it('with nothing missing equals the ordinary projection', () => {
    const tsr = createTsrProjector(model);
    const full = createProjector(model);
    const mask = new Uint8Array(p);
    for (const x of xs) {
      const r = tsr.project(x, mask);
      const f = full.project(x);
      for (let a = 0; a < A; a++) expect(Math.abs(r.scores[a]! - f.scores[a]!)).toBeLessThan(1e-12 * Math.max(1, Math.abs(f.scores[a]!)));
      expect(rel(r.t2, f.t2)).toBeLessThan(1e-12);
      expect(rel(r.q, f.q)).toBeLessThan(1e-12);
    }
  });

  it('estimates the scores of a spectrum with missing variables better than zero-filling does', () => {
    // The known-data-in-place estimate (missing set to the mean) against TSR, on fresh spectra:
    // TSR's score error is smaller (the reason to use it).
    const tsr = createTsrProjector(model);
    const full = createProjector(model);
    const many = rows(sampleRows(200, p, directions, [4, 2.5, 1.5, 0.8], 0.1, 5));
    const mask = new Uint8Array(p);
    for (const j of [2, 3, 4, 5, 6, 7, 8, 20, 21, 22]) mask[j] = 1;
    let errTsr = 0;
    let errZero = 0;
    for (const x of many) {
      const f = Float64Array.from(full.project(x).scores);
      const r = tsr.project(x, mask).scores;
      const filled = x.map((v, j) => (mask[j] ? model.mean[j]! : v));
      const zf = full.project(filled).scores;
      for (let a = 0; a < A; a++) {
        errTsr += (r[a]! - f[a]!) ** 2;
        errZero += (zf[a]! - f[a]!) ** 2;
      }
    }
    expect(errTsr).toBeLessThan(0.5 * errZero);
  });

  it('says when the scores cannot be estimated and names a wrong length', () => {
    const tsr = createTsrProjector(model);
    const all = new Uint8Array(p).fill(1);
    expect(tsr.project(xs[0]!, all).ok).toBe(false);
    expect(() => tsr.project(xs[0]!.slice(1), new Uint8Array(p))).toThrow(/39 values, the model 40/);
    expect(() => tsr.project(xs[0]!, new Uint8Array(3))).toThrow(/missing mask has 3 entries/);
  });
});
