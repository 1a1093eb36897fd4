/**
 * `npm run evaluate` with the simulators' pixel faults (stuck, dead, single-pixel spikes,
 * saturation; their truth names the damaged pixels of each scan): the bad_pixel_* figures
 * (core/evaluate/evaluate-model.ts, docs/bad-pixels.md). Thresholds are ours: the check must find
 * nearly every damaged spectrum, flag no spectrum of a good batch, and keep the damage from raising
 * process alarms that, judged as sent, it does raise.
 */
import { describe, expect, it } from 'vitest';
import { runEvaluation } from '../../scripts/evaluate.ts';
import { simulateBatch } from '../../simulators/batch.ts';

const PIXEL_FAULTS = ['stuck-pixels', 'dead-pixels', 'pixel-spikes', 'saturation'] as const;

describe('pixel faults in the simulators', () => {
  it('change exactly the pixels their truth lists, from onset', { timeout: 300_000 }, () => {
    for (const type of PIXEL_FAULTS) {
      const clean = simulateBatch('reactor', { seed: 21 });
      const f = simulateBatch('reactor', { seed: 21, faults: [{ type, onsetS: 600 }] });
      const truth = f.truth.faults[0]!;
      const byScan = new Map(truth.pixels!.map((e) => [e.index, new Set(e.pixels)]));
      expect(byScan.has(truth.onsetIndex), type).toBe(true);
      // pixels that differ from the clean batch, per scan, against the truth (one comparison each)
      const wrong: string[] = [];
      for (let i = 0; i < f.spectra.length; i++) {
        const hit = byScan.get(i) ?? new Set<number>();
        const x = f.spectra[i]!;
        const c = clean.spectra[i]!;
        for (let j = 0; j < f.axis.length; j++) if (!hit.has(j) && x[j] !== c[j]) wrong.push(`scan ${i} pixel ${j}`);
        for (const j of hit) {
          if (type === 'dead-pixels' && x[j] !== 0) wrong.push(`dead scan ${i} pixel ${j} reads ${x[j]}`);
          if (type !== 'saturation' && x[j] === c[j]) wrong.push(`listed scan ${i} pixel ${j} unchanged`);
        }
      }
      expect(wrong.slice(0, 5), type).toEqual([]);
    }
  });
});

describe('evaluate: bad-pixel figures', () => {
  const r = runEvaluation({ kind: 'dryer', reference: 12, good: 6, perFault: 2, seed: 2026, faults: [...PIXEL_FAULTS] });
  const f = r.figures;

  it('finds the damaged spectra, flags no good one, and keeps the process alarms away', () => {
    console.log(`bad pixels (dryer, ${f.bad_pixel_batches} batches): detected ${f.bad_pixel_detected_rate}, process-alarm batches ${f.bad_pixel_false_alarm_batch_rate} (judged as sent ${f.bad_pixel_false_alarm_batch_rate_without_check}), analyzer alarm ${f.bad_pixel_analyzer_alarm_batch_rate}, unjudged ${f.bad_pixel_unjudged_rate}, flagged good spectra ${f.bad_pixel_flagged_good_rate}`);
    expect(f.bad_pixel_batches).toBe(8);
    expect(f.bad_pixel_detected_rate!).toBeGreaterThan(0.95);
    expect(f.bad_pixel_flagged_good_rate).toBe(0);
    expect(f.bad_pixel_false_alarm_batch_rate!).toBeLessThanOrEqual(f.false_alarm_batch_rate + 0.125);
    expect(f.bad_pixel_false_alarm_batch_rate_without_check!).toBeGreaterThan(f.bad_pixel_false_alarm_batch_rate!);
    expect(f.bad_pixel_analyzer_alarm_batch_rate).toBe(1);
  });
});
