import { describe, expect, it } from 'vitest';
import { matrixFromRows } from '../../core/linalg/dense-matrix.ts';
import { createProjector, fitPca } from '../../core/pca/index.ts';
import { simulateReferenceSet } from '../../simulators/batch.ts';

function corr(x: ArrayLike<number>, y: ArrayLike<number>): number {
  const n = x.length;
  let mx = 0;
  let my = 0;
  for (let i = 0; i < n; i++) {
    mx += x[i]! / n;
    my += y[i]! / n;
  }
  let sxy = 0;
  let sxx = 0;
  let syy = 0;
  for (let i = 0; i < n; i++) {
    sxy += (x[i]! - mx) * (y[i]! - my);
    sxx += (x[i]! - mx) ** 2;
    syy += (y[i]! - my) ** 2;
  }
  return sxy / Math.sqrt(sxx * syy);
}

describe('PCA of a clean dryer reference set (core/pca fitPca)', () => {
  // As practitioners expect of drying data, the first component tracks moisture.
  const set = simulateReferenceSet('dryer', 10, 7);
  const rows: Float32Array[] = [];
  const moisture: number[] = [];
  for (const b of set) {
    b.spectra.forEach((s, i) => {
      rows.push(s);
      moisture.push(b.truth.property.values[i]!);
    });
  }
  const X = matrixFromRows(rows);
  const model = fitPca(X, { components: 3, center: true });
  const proj = createProjector(model);
  const pc1 = rows.map((r) => proj.project(r).scores[0]!);

  it('PC1 has |correlation| ≥ 0.95 with the true moisture', () => {
    expect(Math.abs(corr(pc1, moisture))).toBeGreaterThanOrEqual(0.95);
  });

  it('PC1 carries most of the spectral variance', () => {
    expect(model.explained[0]).toBeGreaterThan(0.8);
  });
});
