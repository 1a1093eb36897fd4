/**
 * A second analyzer on the same process (an analyzer replaced, or a second probe): the same
 * chemistry and process state as the first one for the same seed, seen through another instrument —
 * its own wavelength grid, a wavelength calibration off by `shiftNm` (it reports λ where it measures
 * λ + shift), a broader line shape (Gaussian instrument function of FWHM `lineFwhmNm`), and another
 * photometric gain and offset. For calibration-transfer checks (core/calibration-transfer).
 * Values invented for the scenario.
 */
import type { SimulateOptions, SimulatedBatch } from './batch-types.ts';
import { simulateBatch } from './batch.ts';
import type { ProcessKind } from './faults.ts';

export interface SecondAnalyzer {
  /** Reported axis, nm. */
  axis: number[];
  shiftNm: number;
  lineFwhmNm: number;
  gain: number;
  offset: number;
}

/** 241 points 941.5–1661.5 nm every 3 nm (the first analyzer: 256 points 950–1650 nm), 1.2 nm off, broader and brighter. */
export const SECOND_DRYER_ANALYZER: SecondAnalyzer = {
  axis: Array.from({ length: 241 }, (_, i) => 941.5 + 3 * i),
  shiftNm: 1.2,
  lineFwhmNm: 9,
  gain: 1.06,
  offset: 0.02,
};

/** Gaussian instrument function on an axis: row-normalised weights within ±3σ. */
function smoother(axis: number[], fwhm: number): (x: Float32Array) => Float32Array {
  const sigma = fwhm / (2 * Math.sqrt(2 * Math.log(2)));
  const p = axis.length;
  const rows = axis.map((l) => {
    const idx: number[] = [];
    const w: number[] = [];
    for (let k = 0; k < p; k++) {
      const d = axis[k]! - l;
      if (Math.abs(d) <= 3 * sigma) {
        idx.push(k);
        w.push(Math.exp(-0.5 * (d / sigma) ** 2));
      }
    }
    const s = w.reduce((a, b) => a + b, 0);
    return { idx, w: w.map((v) => v / s) };
  });
  return (x) => {
    const out = new Float32Array(p);
    for (let j = 0; j < p; j++) {
      const r = rows[j]!;
      let s = 0;
      for (let k = 0; k < r.idx.length; k++) s += r.w[k]! * x[r.idx[k]!]!;
      out[j] = s;
    }
    return out;
  };
}

/** The batch `opts` describes, as the second analyzer sees it. */
export function simulateOnSecondAnalyzer(kind: ProcessKind, opts: SimulateOptions, analyzer: SecondAnalyzer = SECOND_DRYER_ANALYZER): SimulatedBatch {
  const trueAxis = analyzer.axis.map((l) => l + analyzer.shiftNm);
  const b = simulateBatch(kind, { ...opts, axis: trueAxis });
  const smooth = smoother(trueAxis, analyzer.lineFwhmNm);
  const spectra = b.spectra.map((x) => {
    const y = smooth(x);
    for (let j = 0; j < y.length; j++) y[j] = analyzer.gain * y[j]! + analyzer.offset;
    return y;
  });
  return { ...b, axis: analyzer.axis.slice(), spectra };
}
