import { describe, expect, it } from 'vitest';
import { EndpointTracker, type EndpointInputs } from '../../core/endpoint/endpoint-tracker.ts';
import { validateEndpointRuleSpec } from '../../core/endpoint/spec.ts';
import type { DomainEvent } from '../../core/monitor/types.ts';

const base: EndpointInputs = { property: null, mbsd: null, slopes: [], goldenEndDistance: null, eta: null };

describe('endpoint state machine (running → nearing → settling → (held) → done → signalled)', () => {
  it('confirms over N consecutive spectra, falls back on a break (hysteresis 1), and is final once done', () => {
    const tr = new EndpointTracker({ criteria: [{ kind: 'property', target: 2, direction: 'below', name: 'moisture', unit: '% w/w' }], combine: 'all', confirm: 3, nearingMin: 5, hysteresis: 1 });
    const ev: DomainEvent[] = [];
    const seqs = [
      { property: 5, eta: { median: 20, low: 15, high: 25 } }, // running
      { property: 3, eta: { median: 4, low: 3, high: 6 } }, // nearing (eta ≤ 5)
      { property: 1.9, eta: null }, // settling 1
      { property: 2.1, eta: null }, // break → nearing
      { property: 1.9, eta: null }, // settling 1
      { property: 1.8, eta: null }, // settling 2
      { property: 1.7, eta: null }, // done
      { property: 3, eta: null }, // stays done
    ];
    const states = seqs.map((s, i) => tr.update(i, 1000 * i, { ...base, ...s }, ev).state);
    expect(states).toEqual(['running', 'nearing', 'settling', 'nearing', 'settling', 'settling', 'done', 'done']);
    expect(ev.map((e) => e.type === 'endpoint-state' && `${e.from}>${e.to}`)).toEqual(['running>nearing', 'nearing>settling', 'settling>nearing', 'nearing>settling', 'settling>done']);
    const last = tr.update(8, 8000, { ...base, property: 1 }, ev);
    expect(last.doneAt).toMatchObject({ seq: 6, t: 6000 });
    expect(last.etaMin).toBeNull();
    const sig = tr.markSignalled(9000, 8);
    expect(sig).toMatchObject({ from: 'done', to: 'signalled' });
    expect(tr.markSignalled(9000, 8)).toBeNull();
  });
  it('a property margin moves the threshold past the target (above: target + margin; below: target − margin)', () => {
    const up = new EndpointTracker({ criteria: [{ kind: 'property', target: 99, direction: 'above', name: 'conversion', unit: '%', margin: 0.12 }], combine: 'all', confirm: 1, nearingMin: 0, hysteresis: 1 });
    const ev: DomainEvent[] = [];
    const a = up.update(0, 0, { ...base, property: 99.1 }, ev);
    expect(a.state).not.toBe('done');
    expect(a.criteria[0]!.threshold).toBeCloseTo(99.12, 12);
    expect(a.criteria[0]!.text).toContain('margin');
    expect(up.update(1, 1000, { ...base, property: 99.12 }, ev).state).toBe('done');
    const down = new EndpointTracker({ criteria: [{ kind: 'property', target: 2, direction: 'below', name: 'moisture', unit: '% w/w', margin: 0.1 }], combine: 'all', confirm: 1, nearingMin: 0 });
    expect(down.update(0, 0, { ...base, property: 1.95 }, ev).state).not.toBe('done');
    expect(down.update(1, 1000, { ...base, property: 1.9 }, ev).state).toBe('done');
  });
  it('combine all needs every criterion; any needs one', () => {
    const rule = (combine: 'all' | 'any') => new EndpointTracker({ criteria: [{ kind: 'mbsd', block: 3, threshold: 0.01 }, { kind: 'golden-end', limit: 9 }], combine, confirm: 1, nearingMin: 0, hysteresis: 1 });
    const inp = { ...base, mbsd: 0.005, goldenEndDistance: 20 };
    expect(rule('all').update(0, 0, inp, []).state).toBe('nearing');
    expect(rule('any').update(0, 0, inp, []).state).toBe('done');
  });
  it('validates the rule and names the bad field', () => {
    expect(() => validateEndpointRuleSpec({ criteria: [], combine: 'all', confirm: 3, nearingMin: 5 })).toThrow(/criteria/);
    expect(() => validateEndpointRuleSpec({ criteria: [{ kind: 'mbsd', block: 1, threshold: 'auto' }], combine: 'all', confirm: 3, nearingMin: 5 })).toThrow(/criteria\.0\.block/);
    expect(() => validateEndpointRuleSpec({ criteria: [{ kind: 'property', margin: 'auto', marginConfidence: 0.4 }], combine: 'all', confirm: 3, nearingMin: 5 })).toThrow(/criteria\.0\.marginConfidence/);
  });
});

describe('minimum time before done (rule minElapsedMin)', () => {
  it("met and confirmed before the minimum time is held ('min-elapsed'), then done at the first spectrum past it", () => {
    const tr = new EndpointTracker({ criteria: [{ kind: 'property', target: 2, direction: 'below', name: 'moisture', unit: '% w/w' }], combine: 'all', confirm: 2, nearingMin: 0, minElapsedMin: 30, minElapsedMethod: 'set by the model owner' });
    const events: DomainEvent[] = [];
    const inp = (elapsedMin: number) => ({ property: 1.5, mbsd: null, slopes: [], goldenEndDistance: null, eta: null, elapsedMin });
    expect(tr.update(1, 0, inp(20), events).state).toBe('settling');
    const st = tr.update(2, 0, inp(25), events);
    expect(st.state).toBe('held');
    expect(st.confirmCount).toBe(2);
    expect(st.holds).toEqual([{ code: 'min-elapsed', text: 'no endpoint before 30.00 min from the batch start (set by the model owner)' }]);
    expect(tr.update(3, 0, inp(29.9), events).state).toBe('held');
    const done = tr.update(4, 0, inp(30), events);
    expect(done.state).toBe('done');
    expect(done.holds).toEqual([]);
    expect(done.doneAt!.seq).toBe(4);
    expect(done.doneAt!.reason).toContain('every guard cleared');
    // one event into settling, one into held (with its reasons), one to done; none while waiting
    expect(events.map((e) => (e.type === 'endpoint-state' ? e.to : ''))).toEqual(['settling', 'held', 'done']);
    const held = events[1]!;
    expect(held.type === 'endpoint-state' && held.holds).toEqual([{ code: 'min-elapsed', text: expect.stringContaining('30.00 min') }]);
    expect(held.type === 'endpoint-state' && held.reason).toContain('at 25.00 min');
    // without elapsed time given, the minimum is not judged (older callers)
    const old = new EndpointTracker({ criteria: [{ kind: 'property', target: 2, direction: 'below', name: 'moisture', unit: '% w/w' }], combine: 'all', confirm: 1, nearingMin: 0, minElapsedMin: 30 });
    expect(old.update(1, 0, { property: 1.5, mbsd: null, slopes: [], goldenEndDistance: null, eta: null }, []).state).toBe('done');
  });
});

describe('guards: standing alarms and a prediction outside its calibration hold the endpoint', () => {
  const rule = { criteria: [{ kind: 'property' as const, target: 2, direction: 'below' as const, name: 'moisture', unit: '% w/w' }], combine: 'all' as const, confirm: 2, nearingMin: 0, hysteresis: 3 };
  const dry = (o: Partial<EndpointInputs> = {}): EndpointInputs => ({ ...base, property: 1.5, standingAlarms: [], extrapolating: false, ...o });
  it('a standing alarm holds a confirmed rule; done only when it has cleared and the rule is still met', () => {
    const tr = new EndpointTracker(rule);
    const ev: DomainEvent[] = [];
    const t2 = 'T² alarm standing since 12.0 min (T² 44000 above its 99 % limit 26.0)';
    expect(tr.update(0, 0, dry({ standingAlarms: [t2] }), ev).state).toBe('settling');
    const h = tr.update(1, 1, dry({ standingAlarms: [t2] }), ev);
    expect(h.state).toBe('held');
    expect(h.holds).toEqual([{ code: 'alarm', text: t2 }]);
    expect(h.doneAt).toBeNull();
    // a second alarm comes up: still held, the new reasons are an event of their own
    const q = 'Q alarm standing since 13.0 min (Q 9.0 above its 99 % limit 2.0)';
    expect(tr.update(2, 2, dry({ standingAlarms: [t2, q] }), ev).holds!.map((x) => x.text)).toEqual([t2, q]);
    // the same reasons on the next spectrum: no further event
    tr.update(3, 3, dry({ standingAlarms: [t2, q] }), ev);
    // alarms cleared, rule still met: done
    const d = tr.update(4, 4, dry(), ev);
    expect(d.state).toBe('done');
    expect(ev.map((e) => e.type === 'endpoint-state' && `${e.from}>${e.to}:${(e.holds ?? []).length}`)).toEqual(['running>settling:0', 'settling>held:1', 'held>held:2', 'held>done:0']);
  });
  it('held through a dip of the rule: stays held, and done only once the rule is confirmed again with the guards cleared', () => {
    const tr = new EndpointTracker(rule);
    const a = ['Q alarm standing since 3.00 min (Q 9.0 above its 99 % limit 2.0)'];
    const run = [
      dry({ standingAlarms: a }), dry({ standingAlarms: a }), // settling, held
      dry({ standingAlarms: a, property: 2.2 }), // one spectrum above the target: still held
      dry({ standingAlarms: a }), // met again (1 of 2): held
      dry(), // alarm cleared but confirmation 2 of 2 only now → done
    ];
    expect(run.map((x, i) => tr.update(i, i, x, []).state)).toEqual(['settling', 'held', 'held', 'held', 'done']);
    const tr2 = new EndpointTracker(rule);
    const run2 = [dry({ standingAlarms: a }), dry({ standingAlarms: a }), dry({ property: 2.2 }), dry(), dry()];
    // the alarm clears during the dip: no longer held, confirmation starts again
    expect(run2.map((x, i) => tr2.update(i, i, x, []).state)).toEqual(['settling', 'held', 'settling', 'settling', 'done']);
  });
  it('a batch whose alarm never clears is never done', () => {
    const tr = new EndpointTracker(rule);
    const states = Array.from({ length: 200 }, (_, i) => tr.update(i, i, dry({ standingAlarms: ['T² alarm standing since 1.00 min (T² 44000 above its 99 % limit 26.0)'] }), []).state);
    expect(states.slice(1).every((s) => s === 'held')).toBe(true);
  });
  it('hold switches: alarms off lets done through; extrapolation is judged only for rules with a property criterion', () => {
    const off = new EndpointTracker({ ...rule, hold: { alarms: false, extrapolation: true } });
    off.update(0, 0, dry({ standingAlarms: ['T²'] }), []);
    expect(off.update(1, 1, dry({ standingAlarms: ['T²'] }), []).state).toBe('done');
    const mbsd = new EndpointTracker({ criteria: [{ kind: 'mbsd', block: 3, threshold: 0.01 }], combine: 'all', confirm: 1, nearingMin: 0 });
    expect(mbsd.update(0, 0, { ...base, mbsd: 0.001, extrapolating: true }, []).state).toBe('done');
  });
  it('the extrapolation hold is released only after `hysteresis` predictions in a row inside calibration', () => {
    const tr = new EndpointTracker(rule);
    const ev: DomainEvent[] = [];
    const flags = [false, true, false, false, true, false, false, false, false];
    const st = flags.map((x, i) => tr.update(i, i, dry({ extrapolating: x }), ev));
    expect(st.map((s) => s.state)).toEqual(['settling', 'held', 'held', 'held', 'held', 'held', 'held', 'done', 'done']);
    expect(st[1]!.holds).toEqual([{ code: 'extrapolating', text: 'moisture prediction outside its calibration (leverage or residual beyond its limit); released after 3 predictions in a row inside it' }]);
    // with the hold switched off, the same run is done at its confirmation
    const off = new EndpointTracker({ ...rule, hold: { alarms: true, extrapolation: false } });
    expect(flags.map((x, i) => off.update(i, i, dry({ extrapolating: x }), []).state)[1]).toBe('done');
  });
  it('hysteresis: a noisy prediction about the threshold does not flap settling/held ↔ nearing', () => {
    // moisture about the 2 % target: every third spectrum above it
    const noisy = [2.5, 2.3, 1.95, 2.05, 1.97, 1.98, 2.02, 1.96, 1.99, 2.01, 1.9, 1.95, 1.97, 1.95];
    const run = (hysteresis: number) => {
      const tr = new EndpointTracker({ ...rule, confirm: 3, hysteresis });
      const ev: DomainEvent[] = [];
      const s = noisy.map((v, i) => tr.update(i, i, dry({ property: v, standingAlarms: i < 13 ? ['PC2 alarm standing since 0.500 min'] : [] }), ev).state);
      return { s, changes: ev.length };
    };
    const flappy = run(1);
    const steady = run(3);
    // every spectrum decides: many state changes; with hysteresis 3 a single spectrum above the
    // target restarts the confirmation count but does not step the state back
    expect(flappy.changes).toBeGreaterThanOrEqual(6);
    expect(steady.s).toEqual(['running', 'running', 'settling', 'settling', 'settling', 'settling', 'settling', 'settling', 'settling', 'settling', 'settling', 'settling', 'held', 'done']);
    expect(steady.changes).toBe(3);
    // three spectra in a row failing the rule step back to nearing
    const tr = new EndpointTracker({ ...rule, confirm: 3, hysteresis: 3 });
    const s = [1.9, 2.1, 2.1, 2.1].map((v, i) => tr.update(i, i, dry({ property: v }), []).state);
    expect(s).toEqual(['settling', 'settling', 'settling', 'nearing']);
  });
  it("'running' becomes 'nearing' only after `hysteresis` spectra in a row say so", () => {
    const tr = new EndpointTracker({ ...rule, nearingMin: 5 });
    const eta = (m: number) => ({ median: m, low: m - 1, high: m + 1 });
    const s = [4, 6, 4, 4, 4].map((m, i) => tr.update(i, i, dry({ property: 3, eta: eta(m) }), []).state);
    expect(s).toEqual(['running', 'running', 'running', 'running', 'nearing']);
  });
});
