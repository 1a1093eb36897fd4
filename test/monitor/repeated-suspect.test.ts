/**
 * The repeated-suspect condition of the batch monitor (docs/bad-pixels.md): `count` suspect scans
 * within the last `window` judged spectra raise it (kind 'analyzer', key 'repeated-suspect'), fewer
 * clear it. Checked against the monitor's own per-spectrum `suspect` flags, recounted here with a
 * plain sliding window; the rule is common practice with no source (default 3 in 20).
 */
import { describe, expect, it } from 'vitest';
import { simulateDryerBatch, type SimulatedBatch } from '../../simulators/batch.ts';
import { REPEATED_SUSPECT_KEY, replayBatch, resolveSuspectScans, type BatchMonitorOptions } from '../../core/monitor/batch-monitor.ts';
import { buildSmallDryerModel } from '../server/model-fixture.ts';

const { model } = buildSmallDryerModel(11);
const spiky = simulateDryerBatch({ seed: 32, id: 'spiky', intervalS: 60, faults: [{ type: 'spikes', onsetS: 300, params: { probability: 0.35, magnitude: 0.3 } }] });

function run(b: SimulatedBatch, opts: BatchMonitorOptions) {
  const { results } = replayBatch(model, b.start, b.spectra.map((v, i) => ({ seq: i, t: b.times[i]!, values: v })), opts);
  const changes = results.flatMap((r) => r.conditionChanges.filter((c) => c.key === REPEATED_SUSPECT_KEY).map((c) => ({ seq: r.seq, active: c.active, kind: c.kind })));
  return { results, changes };
}

/** Where "count suspect in the last window" turns on and off, from the flags alone. */
function expectedChanges(flags: boolean[], count: number, window: number) {
  const out: { seq: number; active: boolean; kind: string }[] = [];
  let on = false;
  for (let i = 0; i < flags.length; i++) {
    const n = flags.slice(Math.max(0, i - window + 1), i + 1).filter(Boolean).length;
    if ((n >= count) !== on) { on = !on; out.push({ seq: i, active: on, kind: 'analyzer' }); }
  }
  return out;
}

describe('repeated suspect scans', () => {
  it('raise and clear by the sliding-window rule (default 3 in 20, and 2 in 5)', () => {
    for (const [opts, count, window] of [[{}, 3, 20], [{ suspectScans: { count: 2, window: 5 } }, 2, 5]] as const) {
      const { results, changes } = run(spiky, opts);
      const flags = results.map((r) => r.suspect);
      expect(flags.filter(Boolean).length).toBeGreaterThanOrEqual(5);
      const exp = expectedChanges(flags, count, window);
      expect(exp.length).toBeGreaterThanOrEqual(1);
      expect(changes).toEqual(exp);
      // standing in activeConditions exactly while on
      for (const r of results) {
        const standing = exp.filter((e) => e.seq <= r.seq).at(-1)?.active ?? false;
        expect(r.activeConditions.includes(REPEATED_SUSPECT_KEY)).toBe(standing);
      }
    }
  });

  it('false never raises it; a batch without spikes does not', () => {
    expect(run(spiky, { suspectScans: false }).changes).toEqual([]);
    const good = simulateDryerBatch({ seed: 31, id: 'good', intervalS: 60 });
    expect(run(good, {}).changes).toEqual([]);
  });

  it('refuses a rule that cannot be met', () => {
    expect(() => resolveSuspectScans({ window: 32 })).toThrow(/window must be an integer 1…31/);
    expect(() => resolveSuspectScans({ count: 0 })).toThrow(/count must be an integer 1…window/);
    expect(() => resolveSuspectScans({ count: 6, window: 5 })).toThrow(/count must be an integer 1…window \(5\)/);
    expect(resolveSuspectScans({})).toEqual({ count: 3, window: 20 });
  });
});
