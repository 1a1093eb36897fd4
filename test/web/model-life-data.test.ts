import { describe, expect, it } from 'vitest';
import { endpointDifference, ewmaGeometry, healthLine, labText, testStatus } from '../../web/src/views/bench/model-life-data.ts';
import type { ModelHealth } from '../../core/api/model-life.ts';

const health = (failed: string[], untested: string[] = []): ModelHealth =>
  ({
    batches: [{ id: 'a' }, { id: 'b' }],
    tests: ['alarm-rate', 't2-rate', 'q-rate', 'drift', 'bias', 'review'].map((code) => ({ code, failed: failed.includes(code), untested: untested.includes(code), text: '' })),
  }) as unknown as ModelHealth;

describe('model-life panels', () => {
  it('words each test and the Floor line', () => {
    expect(testStatus({ code: 'drift', failed: true, untested: false, text: '' })).toEqual({ word: 'fails', tone: 'alarm' });
    expect(testStatus({ code: 'bias', failed: false, untested: true, text: '' }).word).toBe('not tested');
    expect(healthLine(health(['drift', 'review']))).toEqual({ text: 'model health: drift of batch-mean scores, periodic review — fails', tone: 'warn' });
    expect(healthLine(health([], ['bias']))!.text).toBe('model health: 5 tests pass over 2 batches, 1 not tested yet');
    // symbols keep their case in the sentence: "T² beyond its limit", never "t²"
    expect(healthLine(health(['t2-rate', 'q-rate']))!.text).not.toMatch(/\bt²|\bq beyond/);
    expect(healthLine(health(['t2-rate']))!.text).toMatch(/^model health: T²/);
    expect(healthLine(null)).toBeNull();
    // nothing tested is said as such, not as "0 of 6 tests pass" in the tone of a pass
    const none = healthLine({ ...health([], ['alarm-rate', 't2-rate', 'q-rate', 'drift', 'bias', 'review']), batches: [] } as ModelHealth)!;
    expect(none).toEqual({ text: 'model health: not tested yet (no finished batch since deployment)', tone: 'muted' });
  });
  it('words endpoint differences and lab figures', () => {
    expect(endpointDifference(3)).toBe('candidate 3.0 min later');
    expect(endpointDifference(-1.26)).toBe('candidate 1.3 min earlier');
    expect(endpointDifference(0.01)).toBe('same time');
    expect(endpointDifference(null)).toBe('—');
    expect(labText({ n: 2, rmse: 0.1234, bias: -0.05 })).toBe('RMSE 0.123, bias -0.050 (n = 2)');
  });
  it('places the EWMA and its symmetric limits in the box', () => {
    const g = ewmaGeometry([0, 1, -2], [0.5, 0.7, 0.8], 100, 50);
    expect(g.yMax).toBeCloseTo(2.2, 12);
    expect(g.y(0)).toBe(25);
    expect(g.points.split(' ')).toHaveLength(3);
    expect(g.x(2)).toBe(100);
    expect(g.lower.split(' ')[0]).toBe(`0.0,${(25 + (0.5 / 2.2) * 25).toFixed(1)}`);
  });
});
