/** Seeded reference batches of low-rank-plus-noise spectra for the model-build tests (own construction). */
import type { ReferenceBatch } from '../../core/model/monitoring-model.ts';
import { lowRankData } from '../pca/synthetic.ts';

/**
 * `batches` batches of `perBatch` spectra, `p` wavelengths (1000 nm + j), spectra every 10 s from
 * 2026-03-01; rows x = 5 + Σ_a s_a·sd_a·l_a + noise·ε (test/pca/synthetic.ts).
 */
export function syntheticBatches(batches: number, perBatch: number, p: number, sds: number[], noise: number, seed: number): ReferenceBatch[] {
  const { X } = lowRankData(batches * perBatch, p, sds, noise, seed);
  const axis = Float64Array.from({ length: p }, (_, j) => 1000 + j);
  const t0 = Date.UTC(2026, 2, 1);
  return Array.from({ length: batches }, (_, b) => ({
    id: `syn-${b + 1}`,
    axis,
    times: Float64Array.from({ length: perBatch }, (_, i) => t0 + b * 86_400_000 + i * 10_000),
    spectra: Array.from({ length: perBatch }, (_, i) => X.data.slice((b * perBatch + i) * p, (b * perBatch + i + 1) * p)),
  }));
}
