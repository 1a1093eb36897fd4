import { describe, expect, it } from 'vitest';
import type { LiveServerMessage } from '../../core/api/live.ts';
import type { Alarm, BatchSummary } from '../../core/api/rest.ts';
import type { MonitorResult } from '../../core/monitor/types.ts';
import { applyLive, createLiveState, mergeResults, setBatch, sortAlarms } from '../../web/src/live/live-state.ts';
import { SeriesBuffer } from '../../web/src/live/series-buffer.ts';

function result(seq: number, over: Partial<MonitorResult> = {}): MonitorResult {
  return {
    seq,
    t: 1_000_000 + seq * 10_000,
    elapsedMin: seq / 6,
    progress: seq / 6,
    progressFraction: seq / 360,
    scores: [seq * 0.1, seq * -0.05 + 0, 1],
    t2: 2,
    q: 0.5,
    combined: 1,
    limits: { t2: 10, q: 1, combined: 2, confidence: 0.99 },
    localLimits: null,
    envelope: [
      { pc: 1, score: seq * 0.1, expected: 0, lower: -1, upper: 1, status: 'inside', sd: 0 },
      { pc: 2, score: 0, expected: 0, lower: -1, upper: 1, status: 'inside', sd: 0 },
    ],
    prediction: null,
    suspect: false,
    conditionChanges: [],
    activeConditions: [],
    endpoint: { state: 'running', criteria: [], combine: 'all', confirmCount: 0, confirmNeeded: 3, etaMin: null, doneAt: null },
    events: [],
    ...over,
  };
}

const batch: BatchSummary = {
  id: 'B1', unit: 'dryer-1', product: 'granule-A', analyzer: 'nir-1', status: 'open', startedAt: 1_000_000, endedAt: null, endReason: null,
  spectrumCount: 3, firstSeq: 0, lastSeq: 2, lastT: null, model: null, endpointState: 'running', endpointAt: null, alarmCount: 0, activeAlarms: 0,
};

function alarm(id: string, state: Alarm['state'], priority: Alarm['priority'], raisedAt: number): Alarm {
  return {
    id, unit: 'dryer-1', batch: 'B1', kind: 't2', key: 't2', state, priority, message: 'T² 12 > 10', value: 12, limit: 10, active: state.startsWith('active'),
    raisedAt, clearedAt: null, acknowledgedAt: null, acknowledgedBy: null, acknowledgeComment: null, shelvedUntil: null, shelvedBy: null, shelveReason: null, seq: 1, updatedAt: raisedAt,
  };
}

const env = { subscription: 's1', serverTime: 5 };
function snapshot(n: number, results: MonitorResult[]): LiveServerMessage {
  return { type: 'snapshot', ...env, n, scope: { kind: 'unit', unit: 'dryer-1' }, units: [], alarms: [alarm('a1', 'active-unacknowledged', 2, 1)], batch, results, truncatedBefore: null, model: null };
}
const res = (n: number, r: MonitorResult, b = 'B1'): LiveServerMessage => ({ type: 'result', ...env, n, unit: 'dryer-1', batch: b, result: r });

describe('live state reduction', () => {
  it('a snapshot replaces everything; results append in seq order', () => {
    const s = createLiveState();
    s.subscription = 's1';
    const c = applyLive(s, snapshot(1, [result(0), result(1), result(2)]));
    expect(c).toEqual({ units: true, alarms: true, batch: true, series: true, endpoint: true });
    expect(s.series.length).toBe(3);
    expect(Array.from(s.series.view('seq'))).toEqual([0, 1, 2]);
    expect(Array.from(s.series.view('s2'))).toEqual([0, -0.05, -0.1]);
    expect(s.alarms.get('a1')?.state).toBe('active-unacknowledged');
    expect(applyLive(s, res(2, result(3))).series).toBe(true);
    expect(s.series.length).toBe(4);
    expect(s.latest?.seq).toBe(3);
    expect(s.lostMessages).toBe(false);
  });

  it('ignores duplicates and reordered results', () => {
    const s = createLiveState();
    applyLive(s, snapshot(1, [result(0), result(1)]));
    expect(applyLive(s, res(2, result(1))).series).toBe(false);
    expect(applyLive(s, res(3, result(0))).series).toBe(false);
    expect(s.series.length).toBe(2);
    expect(s.ignored).toBe(2);
  });

  it('notices lost messages from a jump in the per-connection counter', () => {
    const s = createLiveState();
    applyLive(s, snapshot(1, []));
    applyLive(s, res(2, result(0)));
    expect(s.lostMessages).toBe(false);
    applyLive(s, res(5, result(1)));
    expect(s.lostMessages).toBe(true);
    applyLive(s, snapshot(6, []));
    expect(s.lostMessages).toBe(false);
  });

  it('records envelope status per PC and whether any limit was exceeded', () => {
    const s = createLiveState();
    applyLive(s, snapshot(1, []));
    const out = result(0, {
      t2: 12,
      envelope: [
        { pc: 1, score: 2, expected: 0, lower: -1, upper: 1, status: 'above', sd: 4 },
        { pc: 2, score: -2, expected: 0, lower: -1, upper: 1, status: 'below', sd: -4 },
      ],
      localLimits: { t2: 8, q: 0.9 },
    });
    applyLive(s, res(2, out));
    applyLive(s, res(3, result(1)));
    expect(Array.from(s.series.view('e1'))).toEqual([1, 0]);
    expect(Array.from(s.series.view('e2'))).toEqual([-1, 0]);
    expect(Array.from(s.series.view('e3')).every(Number.isNaN)).toBe(true);
    expect(Array.from(s.series.view('outside'))).toEqual([1, 0]);
    expect(s.series.at('localT2', 0)).toBe(8);
    expect(Number.isNaN(s.series.at('localT2', 1))).toBe(true);
  });

  it('applies alarm, endpoint, unit and batch deltas', () => {
    const s = createLiveState();
    applyLive(s, snapshot(1, [result(0)]));
    applyLive(s, { type: 'alarm', ...env, n: 2, alarm: alarm('a1', 'active-acknowledged', 2, 1), previousState: 'active-unacknowledged' });
    expect(s.alarms.get('a1')?.state).toBe('active-acknowledged');
    const ep = { state: 'done' as const, criteria: [], combine: 'all' as const, confirmCount: 3, confirmNeeded: 3, etaMin: null, doneAt: { t: 99, seq: 7, reason: 'mbsd' } };
    const c = applyLive(s, { type: 'endpoint', ...env, n: 3, unit: 'dryer-1', batch: 'B1', from: 'settling', to: 'done', endpoint: ep, t: 99, seq: 7 });
    expect(c.endpoint).toBe(true);
    expect(s.endpoint?.state).toBe('done');
    expect(s.batch?.endpointState).toBe('done');
    expect(s.batch?.endpointAt).toBe(99);
    applyLive(s, { type: 'batch', ...env, n: 4, event: 'ended', batch: { ...batch, status: 'ended', endedAt: 200 } });
    expect(s.batch?.status).toBe('ended');
  });

  it('queues gaps and merges the fetched results in seq order', () => {
    const s = createLiveState();
    applyLive(s, snapshot(1, [result(0), result(1)]));
    applyLive(s, res(2, result(5)));
    applyLive(s, { type: 'gap', ...env, n: 3, unit: 'dryer-1', batch: 'B1', fromSeq: 2, toSeq: 4 });
    expect(s.gaps).toEqual([{ fromSeq: 2, toSeq: 4 }]);
    mergeResults(s, [result(3), result(2), result(4), result(1)]);
    expect(Array.from(s.series.view('seq'))).toEqual([0, 1, 2, 3, 4, 5]);
    expect(s.latest?.seq).toBe(5);
  });

  it('keeps at most maxRows rows, dropping the oldest', () => {
    const s = createLiveState(3);
    applyLive(s, snapshot(1, [0, 1, 2, 3, 4].map((i) => result(i))));
    expect(Array.from(s.series.view('seq'))).toEqual([2, 3, 4]);
  });

  it('lists alarms most urgent first', () => {
    const list = sortAlarms([alarm('n', 'normal', 1, 5), alarm('c', 'cleared-unacknowledged', 1, 4), alarm('aa', 'active-acknowledged', 1, 3), alarm('u2', 'active-unacknowledged', 2, 9), alarm('u1', 'active-unacknowledged', 1, 1)]);
    expect(list.map((a) => a.id)).toEqual(['u1', 'u2', 'aa', 'c', 'n']);
  });
});

describe('series buffer', () => {
  it('grows past its capacity without losing rows and finds rows by sorted column', () => {
    const b = new SeriesBuffer(['seq', 'v'] as const, 16);
    for (let i = 0; i < 100; i++) b.push({ seq: i * 2, v: i });
    expect(b.length).toBe(100);
    expect(b.at('v', 99)).toBe(99);
    expect(b.lastIndexAtMost('seq', 51)).toBe(25);
    expect(b.lastIndexAtMost('seq', -1)).toBe(-1);
    b.push({ seq: 500 });
    expect(Number.isNaN(b.at('v', 100))).toBe(true);
    b.keepLast(2);
    expect(Array.from(b.view('seq'))).toEqual([198, 500]);
  });
});

describe('unit scope follows the open batch', () => {
  it('starts a new series when a batch starts, and after results of a new batch fetches its summary', () => {
    const s = createLiveState();
    s.subscription = 's1';
    applyLive(s, { type: 'snapshot', ...env, n: 1, scope: { kind: 'unit', unit: 'dryer-1' }, units: [], alarms: [], batch: null, results: [], truncatedBefore: null, model: null });
    const c = applyLive(s, { type: 'batch', ...env, n: 2, event: 'started', batch });
    expect(c.batch).toBe(true);
    expect(s.batch?.id).toBe('B1');
    applyLive(s, res(3, result(0)));
    applyLive(s, res(4, result(1)));
    expect(s.series.length).toBe(2);
    // The next batch's first result arrives before (or without) its 'batch' message.
    applyLive(s, res(5, result(0), 'B2'));
    expect(s.batch).toBeNull();
    expect(s.pendingBatch).toBe('B2');
    expect(Array.from(s.series.view('seq'))).toEqual([0]);
    expect(setBatch(s, { ...batch, id: 'B9' })).toBe(false);
    expect(setBatch(s, { ...batch, id: 'B2' })).toBe(true);
    expect(s.batch?.id).toBe('B2');
    applyLive(s, res(6, result(1), 'B2'));
    expect(s.series.length).toBe(2);
  });
  it('batch scope ignores results of other batches', () => {
    const s = createLiveState();
    applyLive(s, { type: 'snapshot', ...env, n: 1, scope: { kind: 'batch', batch: 'B1' }, units: [], alarms: [], batch, results: [result(0)], truncatedBefore: null, model: null });
    applyLive(s, res(2, result(1), 'B2'));
    expect(s.series.length).toBe(1);
    expect(s.batch?.id).toBe('B1');
  });
});
