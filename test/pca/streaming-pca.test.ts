/**
 * The streamed PCA (core/pca/streaming-pca.ts) against numpy (scripts/fixtures/streaming-pca-numpy.py:
 * the whole matrix in memory, numpy.cov + numpy.linalg.eigh, leave-one-group-out row-wise PRESS):
 * spectra streamed in two parts (as two worker threads see them) and merged, on invented NIR-like
 * spectra (bench/sections/core-pca.ts syntheticSpectra). Tolerances: eigenvalues and θ 1e-9
 * relative, loadings 1e-7 absolute (unit vectors, sign fixed alike), PRESS 1e-8 relative.
 */
import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { syntheticSpectra } from '../../bench/sections/core-pca.ts';
import { foldModels, mergeScatter, pcaFromScatter, residualPress, ScatterAccumulator } from '../../core/pca/streaming-pca.ts';
import { fitPca } from '../../core/pca/fit-pca.ts';

const SCRIPT = fileURLToPath(new URL('../../scripts/fixtures/streaming-pca-numpy.py', import.meta.url));

describe('streamed PCA against numpy', () => {
  const n = 2400;
  const p = 200;
  const A = 5;
  const maxA = 6;
  const G = 4;
  const X = syntheticSpectra(n, p, 77);
  // 24 "batches" of 100 spectra; group = batch mod 4; batches alternate between two workers.
  const batchOf = (i: number) => Math.floor(i / 100);
  const groupOf = Array.from({ length: n }, (_, i) => batchOf(i) % G);
  const row = (i: number) => X.data.subarray(i * p, (i + 1) * p);
  const centre = Float64Array.from(row(0));
  const workers = [0, 1].map(() => Array.from({ length: G }, () => new ScatterAccumulator(p, centre)));
  for (let i = 0; i < n; i++) workers[batchOf(i) % 2]![groupOf[i]!]!.add(row(i));
  const groups = Array.from({ length: G }, (_, g) => mergeScatter(workers[0]![g]!.state(), workers[1]![g]!.state()));
  const total = groups.reduce((a, b) => mergeScatter(a, b));
  const model = pcaFromScatter(total, A);

  const dir = mkdtempSync(join(tmpdir(), 'tideline-streampca-'));
  let ref: { eigenvalues: number[]; loadings: number[][]; mean: number[]; total: number; theta: number[]; press: number[] };
  try {
    const file = join(dir, 'x.bin');
    writeFileSync(file, new Uint8Array(X.data.buffer, X.data.byteOffset, X.data.byteLength));
    ref = JSON.parse(execFileSync('python3', [SCRIPT, file, String(n), String(p), String(A), String(maxA), JSON.stringify(groupOf)], { encoding: 'utf8', maxBuffer: 64 * 1024 * 1024 }));
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }

  it('eigenvalues, θ and total variance to 1e-9, loadings to 1e-7, mean to 1e-12', () => {
    expect(total.n).toBe(n);
    for (let a = 0; a < A; a++) expect(Math.abs(model.eigenvalues[a]! / ref.eigenvalues[a]! - 1)).toBeLessThan(1e-9);
    for (let k = 0; k < 3; k++) expect(Math.abs(model.theta[k]! / ref.theta[k]! - 1)).toBeLessThan(1e-9);
    expect(Math.abs(model.totalVariance / ref.total - 1)).toBeLessThan(1e-9);
    let d = 0;
    for (let j = 0; j < p; j++) for (let a = 0; a < A; a++) d = Math.max(d, Math.abs(model.loadings[j * A + a]! - ref.loadings[j]![a]!));
    expect(d).toBeLessThan(1e-7);
    for (let j = 0; j < p; j++) expect(Math.abs(model.mean[j]! - ref.mean[j]!)).toBeLessThan(1e-12);
  });

  it('agrees with the in-memory fit on the same spectra', () => {
    const full = fitPca(X, { components: A });
    for (let a = 0; a < A; a++) expect(Math.abs(model.eigenvalues[a]! / full.eigenvalues[a]! - 1)).toBeLessThan(1e-10);
  });

  it('leave-one-group-out PRESS to 1e-8', () => {
    const folds = foldModels(groups, total, maxA);
    const press = new Float64Array(maxA);
    const work = new Float64Array(p);
    for (let i = 0; i < n; i++) residualPress(folds[groupOf[i]!]!, row(i), press, work);
    for (let a = 0; a < maxA; a++) expect(Math.abs(press[a]! / ref.press[a]! - 1)).toBeLessThan(1e-8);
  });

  it('names bad input', () => {
    const acc = new ScatterAccumulator(3);
    expect(() => acc.add([1, 2])).toThrow(/2 values, the others 3/);
    expect(() => acc.add([1, NaN, 2])).toThrow(/value 1 of spectrum 0 is NaN/);
    expect(() => pcaFromScatter(acc.state(), 1)).toThrow(/at least 2 spectra/);
  });
});
