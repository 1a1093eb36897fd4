/**
 * Largest eigenpairs of symmetric matrices with a spectrum known by construction
 * (G = H₃H₂H₁·diag(λ)·H₁H₂H₃ with Householder reflections H = I − 2vvᵀ/vᵀv).
 */
import { describe, expect, it } from 'vitest';
import { topSymmetricEigen } from '../../core/pca/sym-eigen.ts';
import { createPrng } from '../../core/stats/prng.ts';

function withSpectrum(lam: number[], seed: number): Float64Array {
  const d = lam.length;
  const rng = createPrng(seed);
  const G = new Float64Array(d * d);
  lam.forEach((v, i) => (G[i * d + i] = v));
  for (let h = 0; h < 3; h++) {
    const v = Float64Array.from({ length: d }, () => rng.normal());
    const n2 = v.reduce((s, x) => s + x * x, 0);
    const Gv = new Float64Array(d);
    for (let i = 0; i < d; i++) for (let j = 0; j < d; j++) Gv[i] += G[i * d + j]! * v[j]!;
    const vGv = v.reduce((s, x, i) => s + x * Gv[i]!, 0);
    for (let i = 0; i < d; i++) {
      for (let j = 0; j < d; j++) G[i * d + j] += (-2 * (v[i]! * Gv[j]! + Gv[i]! * v[j]!)) / n2 + (4 * v[i]! * v[j]! * vGv) / (n2 * n2);
    }
  }
  return G;
}

function residual(G: Float64Array, d: number, k: number, c: number, values: Float64Array, vectors: Float64Array): number {
  let s = 0;
  for (let i = 0; i < d; i++) {
    let gv = 0;
    for (let j = 0; j < d; j++) gv += G[i * d + j]! * vectors[j * k + c]!;
    s += (gv - values[c]! * vectors[i * k + c]!) ** 2;
  }
  return Math.sqrt(s);
}

describe('topSymmetricEigen (Lanczos with full reorthogonalization)', () => {
  it('finds the largest eigenpairs of a 400 × 400 matrix, including a close pair', () => {
    const lam = Array.from({ length: 400 }, (_, i) => (i < 5 ? 100 / (i + 1) : 1 / (1 + i)));
    const G = withSpectrum(lam, 3);
    const r = topSymmetricEigen(G, 400, 8);
    expect(r.steps).toBeGreaterThan(0); // the Lanczos route, not the full decomposition
    for (let c = 0; c < 8; c++) {
      expect(Math.abs(r.values[c]! / lam[c]! - 1)).toBeLessThan(1e-12);
      expect(residual(G, 400, 8, c, r.values, r.vectors)).toBeLessThan(1e-11 * lam[0]!);
    }
  });
  it('does not miss a repeated largest eigenvalue (rounding reveals the copy; the deflation guard backs it up)', () => {
    const lam = Array.from({ length: 300 }, (_, i) => (i < 2 ? 50 : i === 2 ? 20 : 5 / (1 + i)));
    const G = withSpectrum(lam, 9);
    const r = topSymmetricEigen(G, 300, 3);
    expect(Array.from(r.values).map((v) => Math.round(v * 1e9) / 1e9)).toEqual([50, 50, 20]);
    for (let c = 0; c < 3; c++) expect(residual(G, 300, 3, c, r.values, r.vectors)).toBeLessThan(1e-10 * 50);
  });
  it('small matrices take the full decomposition and agree', () => {
    const lam = [9, 4, 1, 0.5, 0.25, 0.1];
    const r = topSymmetricEigen(withSpectrum(lam, 1), 6, 3);
    expect(r.steps).toBe(0);
    r.values.forEach((v, i) => expect(Math.abs(v - lam[i]!)).toBeLessThan(1e-12));
  });
});
