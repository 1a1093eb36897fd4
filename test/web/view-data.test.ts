import { describe, expect, it } from 'vitest';
import type { Alarm, BatchDetail, EvaluationResult, ModelEnvelopeView, ModelVersionDetail, ResultRecord } from '../../core/api/rest.ts';
import { propertyChartData, propertyTarget } from '../../web/src/views/review-property-data.ts';
import type { Contributions, MonitorResult } from '../../core/monitor/types.ts';
import { departureWindow, endpointRecordText, firstExit, meanContributions, regionShares, sampleSeqs, scanCountsText, suspectScansText, timeline, withRemainder } from '../../web/src/views/review-data.ts';
import { groupAcknowledgeText, ledgerQuery, summariseChange } from '../../web/src/views/ledger-data.ts';
import { CHAIN_PRESETS, buildSettingsFromForm, parseEndpointMark, spreadIndices, summariseEvaluation } from '../../web/src/views/bench-data.ts';
import { availablePcs, goldenPath, progressLabel, referencePaths, scoreBand } from '../../web/src/views/watch-data.ts';
import { contributionSeries, topRegions, topShares } from '../../web/src/views/contribution-data.ts';
import { sortedByAxis } from '../../web/src/views/spectrum-data.ts';
import { niceTicks } from '../../web/src/charts/scatter-svg.tsx';
import { validateChainSpec } from '../../core/preprocess/index.ts';
import { ENDPOINT_WORDS, alarmWords, limitStatus } from '../../web/src/format/status-words.ts';
import { alarmTimes, orderAlarms } from '../../web/src/views/alarm-data.ts';
import { clock, dateTime } from '../../web/src/format/number-format.ts';
import { goldenNote } from '../../web/src/views/spectrum-panel.tsx';

function r(seq: number, o: { out?: 'above' | 'below'; t2?: number; q?: number } = {}): MonitorResult {
  return {
    seq, t: seq * 60_000, elapsedMin: seq, progress: seq, progressFraction: 0, scores: [0, 0], t2: o.t2 ?? 1, q: o.q ?? 0.1, combined: 0,
    limits: { t2: 10, q: 1, combined: 2, confidence: 0.99 }, localLimits: null,
    envelope: [{ pc: 1, score: 0, expected: 0, lower: -1, upper: 1, status: o.out ?? 'inside', sd: o.out === 'above' ? 3.5 : o.out ? -3.5 : 0 }],
    prediction: null, suspect: false, conditionChanges: [], activeConditions: [],
    endpoint: { state: 'running', criteria: [], combine: 'all', confirmCount: 0, confirmNeeded: 3, etaMin: null, doneAt: null }, events: [],
  };
}

describe('Review helpers', () => {
  const rs = [r(0), r(1), r(2, { out: 'above' }), r(3, { t2: 12 }), r(4), r(5, { q: 2 }), r(6), r(7), r(8), r(9), r(10, { out: 'below' })];
  it('finds the first exit and says what left', () => {
    expect(firstExit(rs)?.result.seq).toBe(2);
    expect(firstExit(rs)?.what).toBe('PC1 above the envelope (3.5 sd)');
    expect(firstExit([r(0), r(1, { q: 5 })])?.what).toBe('Q above its limit');
    expect(firstExit([r(0)])).toBeNull();
  });
  it('departure window runs to the last point out, bridging short returns inside', () => {
    expect(departureWindow(rs, 0, 2)).toEqual({ fromSeq: 2, toSeq: 3 });
    expect(departureWindow(rs, 0)).toBeNull();
    expect(departureWindow(rs, 1)).toEqual({ fromSeq: 2, toSeq: 5 });
    expect(departureWindow(rs, 3)).toEqual({ fromSeq: 2, toSeq: 5 });
    expect(departureWindow(rs, 4)).toEqual({ fromSeq: 2, toSeq: 10 });
    // A lone early outlier is not the departure; the first sustained run is.
    const lone = [r(0, { t2: 50 }), r(1), r(2), r(3), r(4), r(5, { q: 3 }), r(6, { q: 3 }), r(7, { out: 'below' }), r(8)];
    expect(departureWindow(lone, 3, 3)).toEqual({ fromSeq: 5, toSeq: 7 });
    // No run long enough (a good batch with a few single points out): no departure window.
    expect(departureWindow(lone, 3, 5)).toBeNull();
    expect(departureWindow([r(0), r(1, { t2: 12 }), r(2), r(3), r(4), r(5), r(6, { out: 'above' }), r(7)])).toBeNull();
    expect(departureWindow([r(0)])).toBeNull();
  });
  it('timeline orders start, first exit, alarms, endpoint and end by minutes from start', () => {
    const b = { startedAt: 0, endedAt: 12 * 60_000, endReason: 'discharged', endpointEvents: [{ id: 'e', unit: 'u', batch: 'b', from: 'settling', to: 'done', t: 9 * 60_000, seq: 9, reason: 'x', recordedAt: 0 }] } as unknown as BatchDetail;
    // One alarm without a spectrum (placed by time), one raised by spectrum #5 on a different clock (placed by seq).
    const alarms = [
      { priority: 2, message: 'data stale', raisedAt: 3.5 * 60_000, clearedAt: 4 * 60_000, key: 'stale', seq: null },
      { priority: 2, message: 'Q 2 > 1', raisedAt: 9e12, clearedAt: null, key: 'q', seq: 5 },
    ] as never;
    const t = timeline(b, rs, alarms);
    expect(t.map((e) => e.kind)).toEqual(['start', 'first-exit', 'alarm', 'alarm-cleared', 'alarm', 'endpoint', 'end']);
    expect(t[6]!.label).toBe('batch end (discharged)');
    expect(t[2]!.tMin).toBe(3.5);
    expect(t[4]!.tMin).toBe(5);
    expect(t[5]!.tMin).toBe(9);
    // an alarm of a replayed batch, returned when the batch ended: received days after its
    // spectra were taken, it sits at its spectra's times on the batch clock, not days later
    const week = 7 * 86_400_000;
    const ended = [{ priority: 3, message: 'PC4 out', kind: 'envelope', key: 'pc4', raisedAt: week + 6 * 60_000, raisedSpectrumT: 6 * 60_000, clearedAt: week + 12 * 60_000, spectrumT: 12 * 60_000, seq: 99 }] as never;
    const t2 = timeline(b, rs, ended).filter((e) => e.kind.startsWith('alarm'));
    expect(t2.map((e) => [e.kind, e.tMin])).toEqual([['alarm', 6], ['alarm-cleared', 12]]);
    expect(t2[1]!.label).toBe('alarm cleared (PC4 score)');
  });
  it('averages contributions and their region sums; samples seqs in the window', () => {
    const c = (k: number): Contributions => ({ axis: [1, 2], t2: [k, 2 * k], q: [k, 0], rbcT2: [0, 0], rbcQ: [k, k], regions: [{ name: 'O–H', from: 1, to: 2, assignment: 'water', t2: 3 * k, q: k, t2Abs: 3 * k }] });
    const m = meanContributions([c(1), c(3)])!;
    expect(m.t2).toEqual([2, 4]);
    expect(m.regions[0]).toMatchObject({ t2: 6, q: 2, t2Abs: 6 });
    expect(meanContributions([])).toBeNull();
    expect(sampleSeqs(rs, 2, 9, 3)).toEqual([2, 6, 9]);
    expect(sampleSeqs(rs, 2, 3, 5)).toEqual([2, 3]);
  });
});

describe('Ledger helpers', () => {
  it('summarises only what changed', () => {
    expect(summariseChange('{"status":"draft","v":1}', '{"status":"approved","v":1}')).toBe('status: draft → approved');
    expect(summariseChange(null, '{"id":"m1","n":[1,2]}')).toBe('id: m1; n: [1,2]');
    const g = groupAcknowledgeText(JSON.stringify({ count: 2, alarms: [
      { id: '0b6c7a52-1111-4c1e-9b1e-000000000001', name: 'Hotelling T²', priority: 1, batch: 'B-7', from: 'cleared-unacknowledged', to: 'normal' },
      { id: '0b6c7a52-2222-4c1e-9b1e-000000000002', name: 'PC3 score', priority: 3, batch: 'B-7', from: 'active-unacknowledged', to: 'active-acknowledged' },
    ] }));
    expect(g).toEqual({ head: '2 alarms acknowledged in one action:', items: [
      'Hotelling T² (P1), batch B-7: cleared, not acknowledged → normal · alarm 0b6c7a52',
      'PC3 score (P3), batch B-7: active, not acknowledged → active, acknowledged · alarm 0b6c7a52',
    ] });
    expect(groupAcknowledgeText('{"status":"x"}')).toBeNull();
    expect(groupAcknowledgeText(null)).toBeNull();
    expect(summariseChange('"a"', null)).toBe('removed a');
    expect(summariseChange(null, null)).toBe('');
    expect(summariseChange(null, 'not json')).toBe('not json');
  });
  it('builds the audit query with ISO times and newest first', () => {
    const q = ledgerQuery({ user: 'al', action: '', object: 'model:', from: '2026-12-02T10:00:00Z', to: '' }, 500);
    expect(q).toEqual({ user: 'al', action: undefined, object: 'model:', from: '2026-12-02T10:00:00.000Z', to: undefined, limit: 500, order: 'desc' });
    // a datetime-local field's text (no zone) is read in UTC, the zone the Ledger shows
    expect(ledgerQuery({ user: '', action: '', object: '', from: '2026-12-02T10:00', to: '2026-12-02T11:30:15' }, 10)).toMatchObject({ from: '2026-12-02T10:00:00.000Z', to: '2026-12-02T11:30:15.000Z' });
  });
});

describe('Model bench helpers', () => {
  it('every chain preset is a valid chain (core/preprocess validation)', () => {
    for (const p of CHAIN_PRESETS) expect(validateChainSpec(p.chain)).toEqual(p.chain);
  });
  it('spreads preview indices from first to last', () => {
    expect(spreadIndices(100, 5)).toEqual([0, 25, 50, 74, 99]);
    expect(spreadIndices(3, 5)).toEqual([0, 1, 2]);
    expect(spreadIndices(0, 5)).toEqual([]);
  });
  it('summarises an evaluation: false alarms on good batches, detection delay on faulty ones', () => {
    const e = { batches: [
      { batch: 'g1', spectra: 100, pointsOutside: 1, alarms: 0, firstAlarmAt: null, firstAlarmKind: null, endpointAt: 5, maxT2: 1, maxQ: 1 },
      { batch: 'g2', spectra: 100, pointsOutside: 3, alarms: 1, firstAlarmAt: 10, firstAlarmKind: 'q', endpointAt: null, maxT2: 1, maxQ: 1 },
      { batch: 'f1', spectra: 50, pointsOutside: 20, alarms: 2, firstAlarmAt: 10 * 60_000, firstAlarmKind: 't2', endpointAt: null, maxT2: 9, maxQ: 9 },
    ] } as unknown as EvaluationResult;
    const s = summariseEvaluation(e, new Set(['f1']), new Map([['f1', 0]]), new Map([['f1', 4 * 60_000]]));
    expect(s.good).toEqual({ batches: 2, withAlarm: 1, falseAlarmRate: 0.5, pointsOutsideRate: 0.02 });
    expect(s.faulty).toEqual({ batches: 1, detected: 1, meanDelayMin: 6 });
    expect(s.endpoint).toEqual({ batches: 3, reached: 1 });
  });
  it('sends only chosen settings, with exclusions when any', () => {
    expect(buildSettingsFromForm({ chain: [], components: 'auto', confidence: 0.99 })).toEqual({ chain: [], components: 'auto', confidence: 0.99 });
    expect(buildSettingsFromForm({ chain: [], components: 2, confidence: 0.95, excludeSpectra: [{ batch: 'b', index: 3 }] }).excludeSpectra).toEqual([{ batch: 'b', index: 3 }]);
    // alarm limits above the drawn ones go as alarms.confidence; equal ones are not sent
    expect(buildSettingsFromForm({ chain: [], components: 2, confidence: 0.99, alarmConfidence: 0.999 }).alarms).toEqual({ confidence: 0.999 });
    expect(buildSettingsFromForm({ chain: [], components: 2, confidence: 0.999, alarmConfidence: 0.999 }).alarms).toBeUndefined();
    expect(buildSettingsFromForm({ chain: [], components: 2, confidence: 0.99, referenceEndpoints: [{ batch: 'b', last: true }] }).referenceEndpoints).toEqual([{ batch: 'b', last: true }]);
    expect(buildSettingsFromForm({ chain: [], components: 2, confidence: 0.99, referenceEndpoints: [] }).referenceEndpoints).toBeUndefined();
  });
  it('reads a typed reference endpoint: minutes, #spectrum, last; empty is none; anything else is named', () => {
    expect(parseEndpointMark('b1', '')).toBeNull();
    expect(parseEndpointMark('b1', ' 52.5 ')).toEqual({ batch: 'b1', elapsedMin: 52.5 });
    expect(parseEndpointMark('b1', '52,5 min')).toEqual({ batch: 'b1', elapsedMin: 52.5 });
    expect(parseEndpointMark('b1', '#316')).toEqual({ batch: 'b1', index: 316 });
    expect(parseEndpointMark('b1', 'LAST')).toEqual({ batch: 'b1', last: true });
    expect(() => parseEndpointMark('b1', 'soon')).toThrow('endpoint of b1: "soon" is not minutes (e.g. 52.5), a spectrum (#316) or "last"');
  });
});

describe('Watch helpers', () => {
  const env: ModelEnvelopeView = {
    versionId: 'v', progressKind: 'time', progressUnit: 'min', progress: [0, 1, 2],
    scores: [{ pc: 1, expected: [0, 1, 2], lower: [-1, 0, 1], upper: [1, 2, 3] }, { pc: 2, expected: [5, 5, 5], lower: [4, 4, 4], upper: [6, 6, 6] }],
    local: null, limits: { t2: 1, q: 1, combined: null, confidence: 0.99 },
    references: [{ batch: 'r1', progress: [0, 1, 2], scores: [[1, 2], [3, 4], [5, 6]] }, { batch: 'r2', progress: [0, 1], scores: [[1, 2], [3, 4]] }],
  };
  it('band, labels and PCs from the envelope view', () => {
    expect(scoreBand(env, 2)).toEqual({ x: [0, 1, 2], mean: [5, 5, 5], lower: [4, 4, 4], upper: [6, 6, 6] });
    expect(scoreBand(env, 3)).toBeNull();
    expect(progressLabel(env)).toBe('elapsed time (min)');
    expect(progressLabel({ progressKind: 'indicator', progressUnit: 'moisture % w/w' })).toBe('batch progress (moisture % w/w)');
    expect(availablePcs(env, null)).toEqual([1, 2]);
    expect(availablePcs(null, [1, 2, 3])).toEqual([1, 2, 3]);
    expect(goldenPath(env, 1, 2)).toEqual([[0, 1, 2], [5, 5, 5]]);
  });
  it('reference paths read scores stored per point or per PC', () => {
    // r1: 3 points × 2 PCs (per point); r2: 2 PCs × 2 points is ambiguous and read per PC.
    expect(referencePaths(env, 1, 2)).toEqual([[[1, 3, 5], [2, 4, 6]], [[1, 2], [3, 4]]]);
  });
});

describe('chart data helpers', () => {
  it('sorts a descending wavelength axis and reorders series with it', () => {
    expect(sortedByAxis([3, 2, 1], [[30, 20, 10]])).toEqual({ axis: [1, 2, 3], series: [[10, 20, 30]] });
  });
  it('region shares are parts of the summed contribution and add up to 100 %, even with negative T² contributions', () => {
    // Signed T² contributions 4, −1 | −2, 0.5 sum to 1.5: shares of the signed sum would be 200 % and −100 %.
    const c: Contributions = { axis: [1, 2, 3, 4], t2: [4, -1, -2, 0.5], q: [0, 2, 2, 4], rbcT2: [0, 0, 0, 0], rbcQ: [0, 0, 0, 0], regions: [
      { name: 'a', from: 1, to: 2, assignment: 'x', t2: 3, q: 2, t2Abs: 5 }, { name: 'b', from: 3, to: 4, assignment: 'y', t2: -1.5, q: 6, t2Abs: 2.5 }] };
    const s = regionShares(c);
    expect(s.map((x) => [x.t2Share, x.qShare])).toEqual([[5 / 7.5, 0.25], [2.5 / 7.5, 0.75]]);
    expect(s.reduce((a, x) => a + x.t2Share, 0)).toBeCloseTo(1, 12);
    expect(topShares(c, 'q', 1)[0]!.name).toBe('b');
    // the table of the largest regions gets one row for the rest, so its columns add up to 100 %
    const rows = withRemainder(topShares(c, 'q', 1), c.regions.length);
    expect(rows.map((r) => r.name)).toEqual(['b', '1 other region']);
    expect(rows.reduce((a, r) => a + r.t2Share, 0)).toBeCloseTo(1, 12);
    expect(rows.reduce((a, r) => a + r.qShare, 0)).toBeCloseTo(1, 12);
    expect(withRemainder(s, 2)).toHaveLength(2);
    expect(withRemainder([{ name: 'x', t2Share: 0.6, qShare: 0.9 }]).at(-1)).toMatchObject({ name: 'all other regions', from: null });
  });
  it('contribution series ascend in wavelength; top regions by size', () => {
    const c: Contributions = { axis: [1500, 1400], t2: [1, 2], q: [3, 4], rbcT2: [0, 0], rbcQ: [0, 0], regions: [
      { name: 'a', from: 1, to: 2, assignment: '', t2: 1, q: -5, t2Abs: 1 }, { name: 'b', from: 1, to: 2, assignment: '', t2: 3, q: 1, t2Abs: 3 }] };
    expect(contributionSeries(c, 'q')).toEqual([[1400, 1500], [4, 3]]);
    expect(topRegions(c, 'q', 1)[0]!.name).toBe('a');
    expect(topRegions(c, 't2', 1)[0]!.name).toBe('b');
  });
  it('nice ticks are round numbers covering the range', () => {
    expect(niceTicks(0, 10)).toEqual([0, 2, 4, 6, 8, 10]);
    expect(niceTicks(0, 0.37)).toEqual([0, 0.1, 0.2, 0.3]);
  });
  it('status words carry text, not only colour', () => {
    expect(ENDPOINT_WORDS.settling.text).toBe('settling');
    expect(limitStatus(11, 10)).toEqual({ text: 'above limit', tone: 'alarm' });
    expect(limitStatus(9, 10).text).toBe('near limit');
    expect(limitStatus(null, 10).text).toBe('no data');
    const a = { state: 'active-unacknowledged', shelvedUntil: 100 } as never;
    expect(alarmWords(a, 50).text).toBe('shelved');
    expect(alarmWords(a, 150).text).toBe('active, not acknowledged');
  });
});

describe('alarm list helpers', () => {
  const alarm = (id: string, batch: string | null, o: Partial<Alarm> = {}): Alarm => ({
    id, unit: 'dryer-1', batch, kind: 't2', key: 't2', state: 'active-unacknowledged', priority: 2, message: '', value: 1, limit: 1, active: true,
    raisedAt: 0, clearedAt: null, acknowledgedAt: null, acknowledgedBy: null, acknowledgeComment: null, shelvedUntil: null, shelvedBy: null,
    shelveReason: null, seq: null, updatedAt: 0, ...o,
  });
  it("puts the running batch's alarms first, each group by state, priority and time", () => {
    const list = [
      alarm('old-unack', 'b1', { raisedAt: 50 }),
      alarm('cur-cleared', 'b2', { state: 'cleared-unacknowledged', raisedAt: 60 }),
      alarm('none', null, { raisedAt: 70 }),
      alarm('cur-active', 'b2', { raisedAt: 40 }),
    ];
    expect(orderAlarms(list, 'b2').map((a) => a.id)).toEqual(['cur-active', 'cur-cleared', 'none', 'old-unack']);
    expect(orderAlarms(list, null).map((a) => a.id)).toEqual(['none', 'old-unack', 'cur-active', 'cur-cleared']);
  });
  it("gives the spectrum's time, the time received only where it differs by more than a minute, the date when the day differs", () => {
    const recv = Date.UTC(2026, 11, 5, 13, 30, 7);
    const taken = Date.UTC(2026, 11, 5, 11, 2, 33);
    const a = alarm('a', 'b', { raisedAt: recv, raisedSpectrumT: taken, seq: 11579, spectrumT: taken });
    expect(alarmTimes(a, recv)).toBe(`raised: spectrum taken ${clock(taken)} (#11579) · received ${clock(recv)}`);
    // received within a minute of the spectrum: one time only
    expect(alarmTimes({ ...a, raisedAt: taken + 2_000 }, recv)).toBe(`raised: spectrum taken ${clock(taken)} (#11579)`);
    const c = alarmTimes({ ...a, clearedAt: recv + 60_000, seq: 11590, spectrumT: taken + 600_000 }, recv);
    expect(c).toBe(`raised: spectrum taken ${clock(taken)} · received ${clock(recv)} · cleared: spectrum #11590 taken ${clock(taken + 600_000)} · received ${clock(recv + 60_000)}`);
    // a spectrum of another day than today carries its date, with the seconds
    const weekAgo = taken - 7 * 86_400_000;
    expect(alarmTimes({ ...a, raisedSpectrumT: weekAgo, spectrumT: weekAgo }, recv)).toMatch(new RegExp(`^raised: spectrum taken ${dateTime(weekAgo).slice(0, 10)} \\d\\d:\\d\\d:\\d\\d \\(#11579\\)`));
    // an alarm the server raised itself (no spectrum behind it): the server's time
    expect(alarmTimes(alarm('s', 'b', { raisedAt: recv }), recv)).toBe(`raised ${clock(recv)}`);
  });
});

describe('spectrum view note', () => {
  it('says what the golden band is, or why there is none', () => {
    expect(goldenNote({ versionId: 'v', progress: -8.67, progressFrom: -9.01, progressTo: -8.42, batches: 30, spectra: 364, k: 3.45, method: '' })).toBe(
      'Golden band: 30 reference batches, 364 of their spectra at progress −9.01 to −8.42 (this spectrum −8.67); each batch\'s mean spectrum, then mean ± 3.45 sd between batches per wavelength.',
    );
    expect(goldenNote({ versionId: null, note: 'no model judged this batch' })).toBe('No golden band: no model judged this batch.');
  });
});

describe('predicted property in Review', () => {
  const res = (seq: number, min: number, value: number | null, threshold = 1.99): ResultRecord =>
    ({ ...r(seq), elapsedMin: min, prediction: value === null ? null : { name: 'moisture', unit: '% w/w', value, t2: 0, q: 0, extrapolating: false },
      endpoint: { state: 'running', criteria: [{ criterion: 'property', met: false, value, threshold, text: '' }], combine: 'all', confirmCount: 0, confirmNeeded: 2, etaMin: null, doneAt: null } }) as ResultRecord;
  it('puts predictions and lab values on one ascending time axis, null where a series has no point', () => {
    const d = propertyChartData([res(1, 0, 15), res(2, 10, 9), res(3, 20, 3)], [{ elapsedMin: 12, value: 8.1 }, { elapsedMin: 20, value: 2.9 }]);
    expect(d).toEqual([[0, 10, 12, 20, 20], [15, 9, null, 3, null], [null, null, 8.1, null, 2.9]]);
  });
  it('takes the target from the model and the threshold from the resolved criterion', () => {
    const v = { settings: { property: { target: 2, direction: 'below' } } } as unknown as ModelVersionDetail;
    expect(propertyTarget(v, [res(1, 0, 15)])).toEqual({ target: 2, threshold: 1.99, text: 'The endpoint rule asks for the prediction at or below 1.99: the target cleared by a margin for the prediction error.' });
    expect(propertyTarget(v, [res(1, 0, 15, 2)]).text).toBe('The endpoint rule asks for the prediction at or below 2.00.');
    expect(propertyTarget(null, [])).toEqual({ target: null, threshold: null, text: '' });
  });
});

describe('the endpoint as the record states it', () => {
  const m = { name: 'm', version: 1, sha256: 'x', id: 'v' } as never;
  it('an ended batch whose endpoint was not reached never reads "running"', () => {
    expect(endpointRecordText({ status: 'ended', endpointState: 'running', model: m })).toEqual({ text: 'endpoint not reached (running at the end)', tone: 'warn', reached: false });
    expect(endpointRecordText({ status: 'ended', endpointState: 'held', model: m }).text).toBe('endpoint not reached (held by a guard at the end)');
    expect(endpointRecordText({ status: 'ended', endpointState: 'done', model: m })).toEqual({ text: 'endpoint reached', tone: 'ok', reached: true });
    expect(endpointRecordText({ status: 'open', endpointState: 'running', model: m }).text).toBe('endpoint running');
    expect(endpointRecordText({ status: 'ended', endpointState: null, model: null }).text).toBe('not judged by a model');
  });
  it('counts suspect scans in words', () => {
    expect(suspectScansText(undefined)).toBeNull();
    expect(suspectScansText(0)).toBe('no suspect scans');
    expect(suspectScansText(1)).toBe('1 suspect scan');
    expect(suspectScansText(17)).toBe('17 suspect scans');
    expect(scanCountsText({})).toBeNull();
    expect(scanCountsText({ suspectCount: 17, unjudgedCount: 0 })).toBe('17 suspect scans');
    expect(scanCountsText({ suspectCount: 0, unjudgedCount: 1 })).toBe('no suspect scans · 1 spectrum not judged (too damaged)');
    expect(scanCountsText({ suspectCount: 2, unjudgedCount: 3 })).toBe('2 suspect scans · 3 spectra not judged (too damaged)');
  });
});
