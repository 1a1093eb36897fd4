/**
 * The unit state published on MQTT and OPC UA, folded from the server core's outbox payloads and
 * monitor results: batch, endpoint latch-to-be, alarms, and the quality that becomes the OPC UA
 * status code (IEC 62541-4 §7.34 meanings; NAMUR NE 107 categories).
 */
import { StatusCodes } from 'node-opcua';
import { describe, expect, it } from 'vitest';
import type { MonitorResult } from '../../core/monitor/types.ts';
import { analyzerStatusSignal, liveValueStatus, ne107Code, severityOf } from '../../server/signals/opcua/status-codes.ts';
import type { SignalEnvelope } from '../../server/signals/outbox-store.ts';
import { applyEvent, applyResult, emptyUnitState } from '../../server/signals/unit-state.ts';

const T0 = Date.UTC(2031, 4, 6, 8, 0, 0);
let seq = 0;
const ev = (type: string, payload: unknown): SignalEnvelope => ({ id: `e${++seq}`, unit: 'dryer-1', seq, type, createdAt: T0 + seq, payload });
const result = (over: Partial<MonitorResult> = {}): MonitorResult =>
  ({
    seq: 5, t: T0 + 50_000, elapsedMin: 0.8, progress: 0.8, progressFraction: 0.02, scores: [], t2: 3, q: 0.001, combined: 1,
    limits: { t2: 10, q: 0.01, combined: 3, confidence: 0.99 }, localLimits: null, envelope: [], prediction: null, suspect: false,
    conditionChanges: [], activeConditions: [],
    endpoint: { state: 'running', criteria: [], combine: 'all', confirmCount: 0, confirmNeeded: 3, etaMin: null, doneAt: null }, events: [], ...over,
  }) as MonitorResult;

describe('unit state', () => {
  it('follows a batch through the server core payloads', () => {
    let s = emptyUnitState('dryer-1', T0);
    expect(s.quality).toBe('bad');
    expect(liveValueStatus(s).equals(StatusCodes.BadWaitingForInitialData)).toBe(true);
    s = applyEvent(s, ev('batch-start', { unit: 'dryer-1', batch: 'B1', product: 'granule A', t: T0, model: { versionId: 'v', name: 'dryer-gold', version: 3, sha256: 'x' } }), T0);
    expect(s).toMatchObject({ batch: 'B1', batchActive: true, product: 'granule A', modelVersion: 'dryer-gold v3', endpoint: { state: 'running', reached: false } });
    s = applyResult(s, result(), { batch: 'B1' }, T0);
    expect(s.quality).toBe('good');
    expect(liveValueStatus(s).equals(StatusCodes.Good)).toBe(true);
    s = applyEvent(s, ev('endpoint-state', { unit: 'dryer-1', batch: 'B1', type: 'endpoint-state', from: 'settling', to: 'done', t: T0 + 99_000, seq: 40, reason: 'moisture ≤ 2 %' }), T0);
    expect(s.endpoint).toMatchObject({ state: 'done', reached: true, t: T0 + 99_000, reason: 'moisture ≤ 2 %' });
    // signalled keeps the time and reason of done
    s = applyEvent(s, ev('endpoint-state', { from: 'done', to: 'signalled', t: T0 + 120_000, seq: 41, reason: 'signalled' }), T0);
    expect(s.endpoint).toMatchObject({ state: 'signalled', reached: true, t: T0 + 99_000, reason: 'moisture ≤ 2 %' });
    // a later result still saying 'done' does not step back from 'signalled'
    s = applyResult(s, result({ endpoint: { ...result().endpoint, state: 'done' } }), { batch: 'B1' }, T0);
    expect(s.endpoint.state).toBe('signalled');
    s = applyEvent(s, ev('batch-end', { unit: 'dryer-1', batch: 'B1', t: T0 + 200_000 }), T0);
    expect(s.batchActive).toBe(false);
    expect(s.lastEventSeq).toBe(seq);
  });

  it('keeps standing alarms from alarm rows; condition rows do not change alarm state', () => {
    let s = emptyUnitState('dryer-1', T0);
    const alarm = (state: string, active: boolean) => ({ alarm: { id: 'a1', unit: 'dryer-1', batch: 'B1', kind: 'q', key: 'q', state, priority: 3, message: 'Q high', value: 0.2, limit: 0.01, active, updatedAt: T0 }, previousState: null });
    s = applyEvent(s, ev('condition', { change: { kind: 'q', key: 'q', active: true, message: 'Q high', value: 0.2, limit: 0.01, priority: 3 }, t: T0, seq: 3 }), T0);
    expect(s.alarms).toEqual([]);
    s = applyEvent(s, ev('alarm', alarm('active-unacknowledged', true)), T0);
    expect(s.alarms.map((a) => [a.key, a.state, a.active])).toEqual([['q', 'active-unacknowledged', true]]);
    s = applyEvent(s, ev('alarm', alarm('cleared-unacknowledged', false)), T0);
    expect(s.alarms.map((a) => [a.key, a.state, a.active])).toEqual([['q', 'cleared-unacknowledged', false]]);
    s = applyEvent(s, ev('alarm', alarm('normal', false)), T0);
    expect(s.alarms).toEqual([]);
  });

  it('carries the shelve (until, by, reason) and suppression; keeps shelved and suppressed alarms until they end', () => {
    let s = emptyUnitState('dryer-1', T0);
    const row = (over: Record<string, unknown>) => ({ alarm: { id: 'a1', unit: 'dryer-1', batch: 'B1', kind: 'q', key: 'q', state: 'normal', priority: 3, message: 'Q high', value: 0.2, limit: 0.01, active: false, shelvedUntil: null, shelvedBy: null, shelveReason: null, updatedAt: T0, ...over }, previousState: null });
    s = applyEvent(s, ev('alarm', row({ state: 'active-unacknowledged', active: true })), T0);
    expect(s.alarms[0]).toMatchObject({ shelved: false, shelf: null, suppressed: false });
    s = applyEvent(s, ev('alarm', row({ state: 'active-unacknowledged', active: true, shelvedUntil: T0 + 60_000, shelvedBy: 'ana', shelveReason: 'lamp swap' })), T0);
    expect(s.alarms[0]).toMatchObject({ shelved: true, shelf: { until: T0 + 60_000, by: 'ana', reason: 'lamp swap' } });
    // the condition returns while shelved: still listed, so that the unshelve reaches the receivers
    s = applyEvent(s, ev('alarm', row({ shelvedUntil: T0 + 60_000, shelvedBy: 'ana', shelveReason: 'lamp swap' })), T0);
    expect(s.alarms.map((a) => [a.key, a.state, a.shelved])).toEqual([['q', 'normal', true]]);
    s = applyEvent(s, ev('alarm', row({ shelveReason: 'shelve expired (system)' })), T0);
    expect(s.alarms).toEqual([]);
    // core/alarms spelling: shelved as ShelveInfo; suppression by state as suppressedBy
    s = applyEvent(s, ev('alarm', { alarm: { key: 't2', kind: 't2', state: 'normal', active: true, priority: 2, message: 'T² high', shelved: { by: 'bo', at: T0, until: T0 + 1000, reason: 'r' }, suppressedBy: ['function-check'] } }), T0);
    expect(s.alarms[0]).toMatchObject({ key: 't2', shelf: { until: T0 + 1000, by: 'bo', reason: 'r' }, suppressed: true });
    s = applyEvent(s, ev('alarm', { alarm: { key: 't2', kind: 't2', state: 'normal', active: false, priority: 2, message: 'T² ok', shelved: null, suppressedBy: ['no-batch'] } }), T0);
    expect(s.alarms.map((a) => [a.key, a.suppressed, a.shelved])).toEqual([['t2', true, false]]);
    s = applyEvent(s, ev('alarm', { alarm: { key: 't2', kind: 't2', state: 'normal', active: false, priority: 2, message: 'T² ok', shelved: null, suppressedBy: [] } }), T0);
    expect(s.alarms).toEqual([]);
  });

  it('maps analyzer status, staleness and model fit to status codes', () => {
    let s = applyResult(emptyUnitState('dryer-1', T0), result(), { batch: 'B1' }, T0);
    const stale = applyEvent(s, ev('alarm', { alarm: { key: 'stale', kind: 'stale', state: 'active-unacknowledged', active: true, priority: 2, message: 'no data' } }), T0);
    expect(liveValueStatus(stale).equals(StatusCodes.UncertainLastUsableValue)).toBe(true);
    // AnalyzerStatus while Tideline receives nothing: failure with BadNoCommunication (IEC 62541-4
    // §7.34: communication with the data source not established), the reason in Quality; on the next
    // result it is the analyzer's own report again, Good
    expect(analyzerStatusSignal(s)).toEqual({ status: 'good', code: StatusCodes.Good });
    expect(analyzerStatusSignal(stale).status).toBe('failure');
    expect(analyzerStatusSignal(stale).code.equals(StatusCodes.BadNoCommunication)).toBe(true);
    expect(stale.qualityReason).toBe('data stale: no data');
    // the MQTT quality summary follows the same precedence and categories as the status codes
    expect(stale.quality).toBe('uncertain');
    const fcOnly = applyEvent(s, ev('analyzer-status', { status: 'function-check' }), T0);
    expect([fcOnly.quality, liveValueStatus(fcOnly).equals(StatusCodes.BadOutOfService)]).toEqual(['bad', true]);
    // a failure Tideline concluded (its own analyzer alarm) is named in the reason
    const overdue = applyEvent(fcOnly, ev('alarm', { alarm: { key: 'function-check-overdue', kind: 'analyzer', state: 'active-unacknowledged', active: true, priority: 1, message: 'function check for 16 min (limit 15 min)' } }), T0);
    expect([overdue.analyzer, overdue.quality, overdue.qualityReason]).toEqual(['failure', 'bad', 'analyzer failure (NE 107 F): function check for 16 min (limit 15 min)']);
    const back = applyResult(stale, result({ seq: 6, t: T0 + 60_000 }), { batch: 'B1' }, T0);
    expect([back.stale, analyzerStatusSignal(back).status, analyzerStatusSignal(back).code.equals(StatusCodes.Good), liveValueStatus(back).equals(StatusCodes.Good)]).toEqual([false, 'good', true, true]);
    // an analyzer in function check announced its silence: it stays function check, Good
    const fcStale = applyEvent(applyEvent(s, ev('analyzer-status', { status: 'function-check' }), T0), ev('alarm', { alarm: { key: 'stale', kind: 'stale', state: 'normal', active: true, priority: 2, message: 'no data', suppressedBy: ['function-check'] } }), T0);
    expect(fcStale.stale).toBe(true);
    expect(analyzerStatusSignal(fcStale)).toEqual({ status: 'function-check', code: StatusCodes.Good });
    expect(liveValueStatus(fcStale).equals(StatusCodes.BadOutOfService)).toBe(true);
    const fc = applyEvent(s, ev('analyzer-status', { status: 'function-check' }), T0);
    expect(liveValueStatus(fc).equals(StatusCodes.BadOutOfService)).toBe(true);
    const fail = applyEvent(s, ev('alarm', { alarm: { key: 'model-axis', kind: 'analyzer', state: 'active-unacknowledged', active: true, priority: 2, message: 'axis' } }), T0);
    expect(fail.analyzer).toBe('failure');
    expect(liveValueStatus(fail).equals(StatusCodes.BadSensorFailure)).toBe(true);
    const oos = applyEvent(s, ev('analyzer-status', { status: 'out-of-specification' }), T0);
    expect(liveValueStatus(oos).equals(StatusCodes.UncertainSensorNotAccurate)).toBe(true);
    // outside the model: T² beyond 3 × its limit (our rule), or the PLS prediction extrapolates
    expect(liveValueStatus(applyResult(s, result({ t2: 31 }), {}, T0)).equals(StatusCodes.UncertainSubNormal)).toBe(true);
    expect(liveValueStatus(applyResult(s, result({ t2: 29 }), {}, T0)).equals(StatusCodes.Good)).toBe(true);
    s = applyResult(s, result({ prediction: { name: 'moisture', unit: '% w/w', value: 9, t2: 1, q: 1, extrapolating: true } }), {}, T0);
    expect(s.qualityReason).toMatch(/extrapolates/);
    expect([ne107Code('good'), ne107Code('failure'), ne107Code('function-check'), ne107Code('out-of-specification'), ne107Code('maintenance-required')]).toEqual([0, 1, 2, 3, 4]);
    expect([1, 2, 3, 4].map(severityOf)).toEqual([900, 700, 500, 300]);
  });
});
