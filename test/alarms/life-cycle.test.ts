/**
 * The alarm life cycle against the ISA-18.2 state transition diagram (ANSI/ISA-18.2-2016 §11,
 * states A normal, B unacknowledged alarm, C acknowledged alarm, D returned-to-normal
 * unacknowledged; shelving I; suppressed by design J), transcribed from the standard's figure
 * (from memory of the published diagram; the four-state core is also in IEC 62682:2014 §7.3).
 */
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import {
  AlarmActionError,
  DEFAULT_ALARM_SETTINGS,
  acknowledge,
  applyCondition,
  createAlarmBook,
  setContext,
  shelve,
  standingAlarms,
  stateOnAcknowledge,
  stateOnCondition,
  tick,
  unshelve,
  type AlarmBook,
  type AlarmCondition,
} from '../../core/alarms/index.ts';
import type { AlarmState } from '../../core/monitor/types.ts';

const T0 = Date.UTC(2031, 4, 6, 8, 0, 0); // invented batch date
const cond = (active: boolean, over: Partial<AlarmCondition> = {}): AlarmCondition => ({
  kind: 't2',
  key: 't2',
  active,
  message: active ? 'T² 31.2 above limit 18.5' : 'T² back inside limit',
  value: active ? 31.2 : 10,
  limit: 18.5,
  priority: 2,
  ...over,
});
const running = () => createAlarmBook('dryer-1', { batchRunning: true, functionCheck: false });

describe('ISA-18.2 transition table', () => {
  // [from, event, to] per the standard's diagram
  const table: [AlarmState, 'activate' | 'clear' | 'ack', AlarmState | null][] = [
    ['normal', 'activate', 'active-unacknowledged'], // A → B
    ['active-unacknowledged', 'ack', 'active-acknowledged'], // B → C
    ['active-unacknowledged', 'clear', 'cleared-unacknowledged'], // B → D
    ['active-acknowledged', 'clear', 'normal'], // C → A
    ['cleared-unacknowledged', 'ack', 'normal'], // D → A
    ['cleared-unacknowledged', 'activate', 'active-unacknowledged'], // D → B
    ['normal', 'ack', null], // nothing to acknowledge
    ['active-acknowledged', 'ack', null],
    ['normal', 'clear', 'normal'],
    ['active-acknowledged', 'activate', 'active-acknowledged'],
  ];
  for (const [from, ev, to] of table) {
    it(`${from} --${ev}--> ${to ?? 'refused'}`, () => {
      const got = ev === 'ack' ? stateOnAcknowledge(from) : stateOnCondition(from, ev === 'activate');
      expect(got).toBe(to);
    });
  }
});

describe('alarm book', () => {
  it('walks normal → unack → ack → normal and records who acknowledged', () => {
    let b = running();
    let s = applyCondition(b, cond(true), T0);
    expect(s.events).toHaveLength(1);
    expect(s.events[0]).toMatchObject({ from: 'normal', to: 'active-unacknowledged', cause: 'condition', priority: 2, unit: 'dryer-1' });
    b = s.book;
    s = acknowledge(b, 't2', { t: T0 + 5000, user: 'ana' });
    expect(s.book.alarms.t2).toMatchObject({ state: 'active-acknowledged', ackedBy: 'ana', ackedAt: T0 + 5000 });
    expect(s.events[0]).toMatchObject({ from: 'active-unacknowledged', to: 'active-acknowledged', user: 'ana' });
    s = applyCondition(s.book, cond(false), T0 + 60_000);
    expect(s.book.alarms.t2!.state).toBe('normal');
    expect(standingAlarms(s.book)).toEqual([]);
  });

  it('a cleared alarm stays until acknowledged', () => {
    let s = applyCondition(running(), cond(true), T0);
    s = applyCondition(s.book, cond(false), T0 + 10_000);
    expect(s.book.alarms.t2!.state).toBe('cleared-unacknowledged');
    expect(standingAlarms(s.book).map((r) => r.key)).toEqual(['t2']);
    s = acknowledge(s.book, 't2', { t: T0 + 20_000, user: 'ana' });
    expect(s.book.alarms.t2!.state).toBe('normal');
  });

  it('refuses to acknowledge what needs no acknowledgement, naming the state', () => {
    const s = applyCondition(running(), cond(false), T0);
    expect(() => acknowledge(s.book, 't2', { t: T0, user: 'ana' })).toThrow(/normal: nothing to acknowledge/);
    expect(() => acknowledge(s.book, 'nope', { t: T0, user: 'ana' })).toThrow(AlarmActionError);
  });

  it('does not change the book it was given', () => {
    const b = running();
    const s1 = applyCondition(b, cond(true), T0);
    const frozen = JSON.stringify(s1.book);
    acknowledge(s1.book, 't2', { t: T0 + 1, user: 'ana' });
    shelve(s1.book, 't2', { t: T0 + 1, user: 'ana', durationMs: 60_000, reason: 'probe window cleaning' });
    expect(JSON.stringify(s1.book)).toBe(frozen);
    expect(b.alarms).toEqual({});
  });
});

describe('shelving', () => {
  it('needs a reason and a time within the maximum', () => {
    const s = applyCondition(running(), cond(true), T0);
    expect(() => shelve(s.book, 't2', { t: T0, user: 'ana', durationMs: 60_000, reason: ' ' })).toThrow(/reason/);
    expect(() => shelve(s.book, 't2', { t: T0, user: 'ana', durationMs: 9 * 3600_000, reason: 'x' })).toThrow(/exceeds the maximum of 480 min/);
    expect(() => shelve(s.book, 't2', { t: T0, user: 'ana', durationMs: 0, reason: 'x' })).toThrow(/positive/);
  });

  it('hides the alarm, tracks the condition, and re-annunciates at expiry if still active', () => {
    let s = applyCondition(running(), cond(true), T0);
    s = shelve(s.book, 't2', { t: T0 + 1000, user: 'ana', durationMs: 30 * 60_000, reason: 'known probe fouling' });
    expect(s.book.alarms.t2).toMatchObject({ state: 'normal', conditionActive: true });
    expect(s.book.alarms.t2!.shelved).toEqual({ by: 'ana', at: T0 + 1000, until: T0 + 1000 + 30 * 60_000, reason: 'known probe fouling' });
    expect(s.events[0]).toMatchObject({ cause: 'shelve', reason: 'known probe fouling', user: 'ana' });
    // condition clears and returns while shelved: no annunciation
    s = applyCondition(s.book, cond(false), T0 + 60_000);
    expect(s.book.alarms.t2!.state).toBe('normal');
    s = applyCondition(s.book, cond(true), T0 + 120_000);
    expect(s.book.alarms.t2!.state).toBe('normal');
    // not yet expired
    expect(tick(s.book, T0 + 10 * 60_000).events.filter((e) => e.cause === 'shelve-expired')).toEqual([]);
    const t = tick(s.book, T0 + 1000 + 30 * 60_000);
    expect(t.events.find((e) => e.cause === 'shelve-expired')).toMatchObject({ to: 'active-unacknowledged', t: T0 + 1000 + 30 * 60_000 });
    expect(t.book.alarms.t2!.shelved).toBeNull();
  });

  it('unshelve by the operator returns to normal when the condition has cleared', () => {
    let s = applyCondition(running(), cond(true), T0);
    s = shelve(s.book, 't2', { t: T0, user: 'ana', durationMs: 60_000, reason: 'r' });
    s = applyCondition(s.book, cond(false), T0 + 1000);
    s = unshelve(s.book, 't2', { t: T0 + 2000, user: 'ben' });
    expect(s.book.alarms.t2!.state).toBe('normal');
    expect(s.events[0]).toMatchObject({ cause: 'unshelve', user: 'ben' });
    expect(() => unshelve(s.book, 't2', { t: T0 + 3000, user: 'ben' })).toThrow(/not shelved/);
  });
});

describe('suppression by state', () => {
  it('suppresses model alarms while no batch runs, not the stale-data alarm', () => {
    let b = createAlarmBook('dryer-1');
    let s = applyCondition(b, cond(true), T0);
    expect(s.book.alarms.t2).toMatchObject({ state: 'normal', conditionActive: true, suppressedBy: ['no-batch'] });
    s = applyCondition(s.book, { kind: 'stale', key: 'stale', active: true, message: 'no spectrum for 60 s', value: 60, limit: 30, priority: 1 }, T0);
    expect(s.book.alarms.stale!.state).toBe('active-unacknowledged');
    b = s.book;
    s = setContext(b, { batchRunning: true, functionCheck: false }, T0 + 1000);
    expect(s.events.map((e) => [e.key, e.cause, e.to])).toEqual([['t2', 'unsuppress', 'active-unacknowledged']]);
  });

  it('suppresses stale and model alarms while the analyzer is in function check', () => {
    let s = applyCondition(running(), cond(true), T0);
    s = setContext(s.book, { batchRunning: true, functionCheck: true }, T0 + 1);
    expect(s.book.alarms.t2).toMatchObject({ state: 'normal', suppressedBy: ['function-check'] });
    expect(s.events[0]).toMatchObject({ cause: 'suppress', from: 'active-unacknowledged', to: 'normal' });
  });
});

describe('chattering (ISA-18.2: ≥ 3 activations in 1 min)', () => {
  it('flags the third activation within 60 s and lets the flag decay', () => {
    let b = running();
    const times = [0, 20_000, 40_000];
    for (const [i, dt] of times.entries()) {
      b = applyCondition(b, cond(true), T0 + dt).book;
      expect(b.alarms.t2!.chattering).toBe(i === 2);
      b = applyCondition(b, cond(false), T0 + dt + 5000).book;
    }
    const t = tick(b, T0 + 60_000 + 1); // first activation leaves the window
    expect(t.book.alarms.t2!.chattering).toBe(false);
    expect(t.events.find((e) => e.cause === 'chattering')).toMatchObject({ chattering: false });
  });

  it('two activations a minute apart are not chattering', () => {
    let b = running();
    b = applyCondition(b, cond(true), T0).book;
    b = applyCondition(b, cond(false), T0 + 10_000).book;
    b = applyCondition(b, cond(true), T0 + 61_000).book;
    b = applyCondition(b, cond(false), T0 + 62_000).book;
    b = applyCondition(b, cond(true), T0 + 90_000).book;
    expect(b.alarms.t2!.activations).toEqual([T0 + 61_000, T0 + 90_000]);
    expect(b.alarms.t2!.chattering).toBe(false);
  });
});

describe('invariants under random operator and process sequences (fast-check)', () => {
  it('state always agrees with condition and annunciation', () => {
    const op = fc.oneof(
      fc.record({ k: fc.constant('cond' as const), active: fc.boolean() }),
      fc.record({ k: fc.constant('ack' as const) }),
      fc.record({ k: fc.constant('shelve' as const), min: fc.integer({ min: 1, max: 20 }) }),
      fc.record({ k: fc.constant('unshelve' as const) }),
      fc.record({ k: fc.constant('ctx' as const), batch: fc.boolean(), fc: fc.boolean() }),
      fc.record({ k: fc.constant('tick' as const) }),
    );
    fc.assert(
      fc.property(fc.array(fc.tuple(op, fc.integer({ min: 0, max: 600_000 })), { maxLength: 60 }), (ops) => {
        let b: AlarmBook = running();
        let t = T0;
        b = applyCondition(b, cond(false), t).book;
        for (const [o, dt] of ops) {
          t += dt;
          try {
            if (o.k === 'cond') b = applyCondition(b, cond(o.active), t).book;
            else if (o.k === 'ack') b = acknowledge(b, 't2', { t, user: 'u' }).book;
            else if (o.k === 'shelve') b = shelve(b, 't2', { t, user: 'u', durationMs: o.min * 60_000, reason: 'r' }).book;
            else if (o.k === 'unshelve') b = unshelve(b, 't2', { t, user: 'u' }).book;
            else if (o.k === 'ctx') b = setContext(b, { batchRunning: o.batch, functionCheck: o.fc }, t).book;
            else b = tick(b, t, DEFAULT_ALARM_SETTINGS).book;
          } catch (e) {
            if (!(e instanceof AlarmActionError)) throw e;
          }
          const r = b.alarms.t2!;
          const hidden = r.shelved !== null || r.suppressedBy.length > 0;
          if (hidden) expect(r.state).toBe('normal');
          else if (r.conditionActive) expect(['active-unacknowledged', 'active-acknowledged']).toContain(r.state);
          else expect(['normal', 'cleared-unacknowledged']).toContain(r.state);
        }
      }),
      { numRuns: 300, seed: 7 },
    );
  });
});
