import { describe, expect, it } from 'vitest';
import { simulateReferenceSet } from '../../simulators/batch.ts';
import { matrixFromRows } from '../../core/linalg/dense-matrix.ts';
import { fitChain } from '../../core/preprocess/index.ts';
import { crossValidatePls1 } from '../../core/pls/index.ts';
import { kernelCrossValidatePls1 } from '../../core/model/pls-kernel-cv.ts';

// Reference: A1's NIPALS cross-validation (core/pls, itself checked against R pls on the gasoline
// data, Mevik & Wehrens 2007). The kernel form (Dayal & MacGregor 1997) must give the same RMSECV
// to round-off and the same recommended count.
describe('PLS1 cross-validation from cross-products (kernel algorithm)', () => {
  it('agrees with NIPALS cross-validation on simulated reactor spectra near the endpoint', () => {
    const ref = simulateReferenceSet('reactor', 3, 7);
    const rows: ArrayLike<number>[] = [];
    const y: number[] = [];
    for (const b of ref) b.spectra.forEach((s, i) => { const v = b.truth.property.values[i]!; if (v >= 95) { rows.push(s); y.push(v); } });
    const raw = matrixFromRows(rows);
    const X = fitChain([{ step: 'msc' }, { step: 'scale', center: true, scaling: 'none' }], ref[0]!.axis, raw).applyMatrix(raw);
    const a = crossValidatePls1(X, y, { maxComponents: 10, folds: 10 });
    const b = kernelCrossValidatePls1(X, y, 10, 10);
    expect(b.recommended).toBe(a.recommended);
    for (let i = 0; i < 10; i++) expect(Math.abs(b.rmsecv[i]! - a.rmsecv[i]!)).toBeLessThanOrEqual(1e-8 * a.rmsecv[i]!);
  });
});
