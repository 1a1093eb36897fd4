import { describe, expect, it } from 'vitest';
import { ConditionFilter } from '../../core/monitor/condition-filter.ts';

// On-delay / off-delay semantics as documented in core/monitor/condition-filter.ts (k of m on-delay, off-delay with deadband),
// alarm management practice per ANSI/ISA-18.2.
function run(f: ConditionFilter, values: number[], limit = 1) {
  return values.map((v) => f.update(v, limit));
}

describe('condition filter: on-delay and off-delay', () => {
  it('k = m = 3: activates exactly on the third consecutive point out', () => {
    const r = run(new ConditionFilter({ onDelay: 3, onWindow: 3, offDelay: 2, deadband: 0 }), [2, 2, 2, 2]);
    expect(r.map((x) => x.active)).toEqual([false, false, true, true]);
    expect(r.map((x) => x.changed)).toEqual([false, false, true, false]);
    expect(r.map((x) => x.suspect)).toEqual([true, true, false, false]);
  });
  it('a single spike is a suspect scan, not an alarm', () => {
    const r = run(new ConditionFilter({ onDelay: 2, onWindow: 3, offDelay: 2, deadband: 0 }), [0, 5, 0, 0, 0]);
    expect(r.some((x) => x.active)).toBe(false);
    expect(r.map((x) => x.suspect)).toEqual([false, true, false, false, false]);
  });
  it('k of m: 3 of 5 non-consecutive points activate on the third', () => {
    const r = run(new ConditionFilter({ onDelay: 3, onWindow: 5, offDelay: 1, deadband: 0 }), [2, 0, 2, 0, 2]);
    expect(r.map((x) => x.active)).toEqual([false, false, false, false, true]);
    // the same points spread over 6 samples do not
    const r2 = run(new ConditionFilter({ onDelay: 3, onWindow: 5, offDelay: 1, deadband: 0 }), [2, 0, 0, 2, 0, 0, 2]);
    expect(r2.some((x) => x.active)).toBe(false);
  });
  it('off-delay: clears exactly after offDelay consecutive points back in', () => {
    const r = run(new ConditionFilter({ onDelay: 1, onWindow: 1, offDelay: 3, deadband: 0 }), [2, 0, 0, 2, 0, 0, 0, 0]);
    expect(r.map((x) => x.active)).toEqual([true, true, true, true, true, true, false, false]);
    expect(r.map((x) => x.changed)).toEqual([true, false, false, false, false, false, true, false]);
  });
  it('deadband: values between limit·(1−deadband) and the limit do not count towards clearing', () => {
    const r = run(new ConditionFilter({ onDelay: 1, onWindow: 1, offDelay: 2, deadband: 0.1 }), [2, 0.95, 0.95, 0.95, 0.85, 0.85]);
    expect(r.map((x) => x.active)).toEqual([true, true, true, true, true, false]);
  });
  it('rejects bad settings with a clear message', () => {
    expect(() => new ConditionFilter({ onDelay: 4, onWindow: 3, offDelay: 1, deadband: 0 })).toThrow(/onDelay/);
    expect(() => new ConditionFilter({ onDelay: 1, onWindow: 40, offDelay: 1, deadband: 0 })).toThrow(/onWindow/);
    expect(() => new ConditionFilter({ onDelay: 1, onWindow: 3, offDelay: 0, deadband: 0 })).toThrow(/offDelay/);
    expect(() => new ConditionFilter({ onDelay: 1, onWindow: 3, offDelay: 1, deadband: 1 })).toThrow(/deadband/);
  });
});
