import { describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { meanSpectrum, spectralBand } from '../../core/envelope/spectral-band.ts';

// Three reference batches with two, three and one spectra near one point of progress (4 wavelengths).
const BATCHES = [
  [[0.50, 0.61, 0.72, 0.40], [0.52, 0.63, 0.70, 0.41]],
  [[0.48, 0.60, 0.75, 0.39], [0.47, 0.58, 0.77, 0.38], [0.49, 0.59, 0.76, 0.40]],
  [[0.55, 0.66, 0.69, 0.43]],
];

describe('golden band of whole spectra (batch means ± k·s between batches)', () => {
  it('equals numpy: mean of batch means and std(ddof=1) per wavelength', () => {
    const py = `
import json, numpy as np
b = json.loads('${JSON.stringify(BATCHES)}')
m = np.array([np.mean(np.array(x), axis=0) for x in b])
print(json.dumps({"mean": m.mean(axis=0).tolist(), "sd": m.std(axis=0, ddof=1).tolist()}))`;
    const want = JSON.parse(execFileSync('python3', ['-c', py]).toString()) as { mean: number[]; sd: number[] };
    const band = spectralBand(BATCHES.map(meanSpectrum), 3);
    expect(band.batches).toBe(3);
    for (let j = 0; j < 4; j++) {
      expect(band.mean[j]).toBeCloseTo(want.mean[j], 12);
      expect(band.sd[j]).toBeCloseTo(want.sd[j], 12);
      expect(band.upper[j]).toBeCloseTo(want.mean[j] + 3 * want.sd[j], 12);
      expect(band.lower[j]).toBeCloseTo(want.mean[j] - 3 * want.sd[j], 12);
    }
  });
  it('names what is wrong: one batch, a bad k, unequal lengths', () => {
    expect(() => spectralBand([[1, 2]], 3)).toThrow(/at least 2 reference batches/);
    expect(() => spectralBand([[1, 2], [1, 2]], 0)).toThrow(/k must be/);
    expect(() => spectralBand([[1, 2], [1]], 3)).toThrow(/batch 1 has 1 values/);
    expect(() => meanSpectrum([])).toThrow(/no spectra/);
  });
});
