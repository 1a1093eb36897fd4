import { describe, expect, it } from 'vitest';
import { EndpointTracker, type EndpointInputs } from '../../core/endpoint/endpoint-tracker.ts';
import { validateEndpointRuleSpec } from '../../core/endpoint/spec.ts';
import type { DomainEvent } from '../../core/monitor/types.ts';

const base: EndpointInputs = { property: null, mbsd: null, slopes: [], goldenEndDistance: null, eta: null };

describe('endpoint state machine (running → nearing → settling → done → signalled)', () => {
  it('confirms over N consecutive spectra, falls back on a break, and is final once done', () => {
    const tr = new EndpointTracker({ criteria: [{ kind: 'property', target: 2, direction: 'below', name: 'moisture', unit: '% w/w' }], combine: 'all', confirm: 3, nearingMin: 5 });
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
    const up = new EndpointTracker({ criteria: [{ kind: 'property', target: 99, direction: 'above', name: 'conversion', unit: '%', margin: 0.12 }], combine: 'all', confirm: 1, nearingMin: 0 });
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
    const rule = (combine: 'all' | 'any') => new EndpointTracker({ criteria: [{ kind: 'mbsd', block: 3, threshold: 0.01 }, { kind: 'golden-end', limit: 9 }], combine, confirm: 1, nearingMin: 0 });
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
  it('met and confirmed before the minimum time stays settling, then done at the first spectrum past it', async () => {
    const { EndpointTracker } = await import('../../core/endpoint/endpoint-tracker.ts');
    const tr = new EndpointTracker({ criteria: [{ kind: 'property', target: 2, direction: 'below', name: 'moisture', unit: '% w/w' }], combine: 'all', confirm: 2, nearingMin: 0, minElapsedMin: 30, minElapsedMethod: 'set by the model owner' });
    const events: import('../../core/monitor/types.ts').DomainEvent[] = [];
    const inp = (elapsedMin: number) => ({ property: 1.5, mbsd: null, slopes: [], goldenEndDistance: null, eta: null, elapsedMin });
    expect(tr.update(1, 0, inp(20), events).state).toBe('settling');
    const st = tr.update(2, 0, inp(25), events);
    expect(st.state).toBe('settling');
    expect(st.confirmCount).toBe(2);
    expect(tr.update(3, 0, inp(29.9), events).state).toBe('settling');
    const done = tr.update(4, 0, inp(30), events);
    expect(done.state).toBe('done');
    expect(done.doneAt!.seq).toBe(4);
    // one event into settling (confirmation counting), one to done; none while waiting
    expect(events.map((e) => (e.type === 'endpoint-state' ? e.to : ''))).toEqual(['settling', 'done']);
    // without elapsed time given, the minimum is not judged (older callers)
    const old = new EndpointTracker({ criteria: [{ kind: 'property', target: 2, direction: 'below', name: 'moisture', unit: '% w/w' }], combine: 'all', confirm: 1, nearingMin: 0, minElapsedMin: 30 });
    expect(old.update(1, 0, { property: 1.5, mbsd: null, slopes: [], goldenEndDistance: null, eta: null }, []).state).toBe('done');
  });
});
