/**
 * Lab results as a site gets them (simulators/lab-samples.ts): a few per batch, more near the end,
 * recorded to the minute, on the nearest transmitted spectrum, within the stated lab error.
 */
import { describe, expect, it } from 'vitest';
import { simulateDryerBatch, simulateReferenceSet } from '../../simulators/batch.ts';
import { drawLabSamples, LAB_METHODS, labSd } from '../../simulators/lab-samples.ts';
import { Rng } from '../../simulators/prng.ts';

describe('lab samples', () => {
  for (const kind of ['dryer', 'reactor'] as const) {
    it(`${kind}: a few per batch, more near the end, on the nearest spectrum, within the lab error`, () => {
      const m = LAB_METHODS[kind];
      const z: number[] = [];
      for (const b of simulateReferenceSet(kind, 6, 31)) {
        const lab = drawLabSamples(b, new Rng(5).derive(b.id));
        expect(lab.length, b.id).toBeGreaterThanOrEqual(4);
        expect(lab.length, b.id).toBeLessThanOrEqual(12);
        expect(lab.length / b.spectra.length).toBeLessThan(0.06);
        const end = b.times[b.times.length - 1]! - b.start;
        const first = lab.filter((l) => l.sampleT - b.start < end / 3).length;
        const last = lab.filter((l) => l.sampleT - b.start >= (2 * end) / 3).length;
        expect(last, b.id).toBeGreaterThan(first);
        expect(lab[lab.length - 1]!.kind).toBe('discharge');
        for (const l of lab) {
          expect(l.sampleT % 60_000).toBe(0);
          const d = Math.abs(b.times[l.spectrumIndex]! - l.sampleT);
          for (const t of b.times) expect(Math.abs(t - l.sampleT)).toBeGreaterThanOrEqual(d);
          expect(l.value).toBeLessThanOrEqual(m.max);
          z.push((l.value - l.trueValue) / labSd(m, l.trueValue));
        }
      }
      for (const v of z) expect(Math.abs(v)).toBeLessThan(5);
      const rms = Math.sqrt(z.reduce((s, v) => s + v * v, 0) / z.length);
      expect(rms).toBeGreaterThan(0.5);
      expect(rms).toBeLessThan(1.6);
    });
  }

  it('skips spectra the analyzer never sent (drop-out)', () => {
    const b = simulateDryerBatch({ seed: 3, faults: [{ type: 'dropout', onsetS: 600, params: { durationS: 900 } }] });
    const dropped = new Set(b.truth.dropped);
    expect(dropped.size).toBeGreaterThan(0);
    const lab = drawLabSamples(b, new Rng(1));
    for (const l of lab) expect(dropped.has(l.spectrumIndex)).toBe(false);
  });
});
