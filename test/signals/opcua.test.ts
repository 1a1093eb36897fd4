/**
 * OPC UA channel with a node-opcua client acting as the DCS: the endpoint handshake (latched once,
 * with time and reason, reset by the DCS's acknowledge), the heartbeat, status codes, and a T² limit
 * alarm that appears as an Alarms & Conditions event and clears. Events enter through the outbox
 * as the server core writes them.
 */
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { DataType, StatusCodes, type DataValue, type NodeId } from 'node-opcua';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Alarm } from '../../core/api/rest.ts';
import type { MonitorResult } from '../../core/monitor/types.ts';
import { parseSignalsConfig } from '../../server/signals/config.ts';
import { SignalDispatcher } from '../../server/signals/dispatcher.ts';
import { OpcuaChannel } from '../../server/signals/opcua/opcua-channel.ts';
import { SqliteSignalRepository } from '../../server/storage/sqlite-signals.ts';
import { connectClient, type TestClient } from './helpers/opcua-client.ts';
import { appendOutbox, openSignalDb } from './helpers/outbox-db.ts';

const T0 = Date.UTC(2031, 4, 6, 8, 0, 0);
const U = 'dryer-1';
const P = (name: string) => `/Objects/1:Tideline/1:${U}/1:${name}`;

async function until(cond: () => boolean, what: string, ms = 20_000): Promise<void> {
  const end = Date.now() + ms;
  while (!cond()) {
    if (Date.now() > end) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 25));
  }
}

function result(seq: number, over: Partial<MonitorResult> = {}): MonitorResult {
  return {
    seq,
    t: T0 + seq * 10_000,
    elapsedMin: seq / 6,
    progress: seq / 6,
    progressFraction: Math.min(1, seq / 300),
    scores: [0.1, -0.2],
    t2: 4,
    q: 0.002,
    combined: 1,
    limits: { t2: 11.3, q: 0.01, combined: 3, confidence: 0.99 },
    localLimits: null,
    envelope: [],
    prediction: { name: 'moisture', unit: '% w/w', value: 6 - seq / 60, t2: 1, q: 0.001, extrapolating: false },
    suspect: false,
    conditionChanges: [],
    activeConditions: [],
    endpoint: { state: 'running', criteria: [], combine: 'all', confirmCount: 0, confirmNeeded: 3, etaMin: { median: 20, low: 15, high: 25 }, doneAt: null },
    events: [],
    ...over,
  };
}

/** An alarm row as the server core writes it (core/api/rest.ts Alarm). */
function alarm(over: Partial<Alarm>): Alarm {
  return {
    id: `alarm-${over.key ?? 't2'}`, unit: U, batch: 'D1-0042', kind: 't2', key: 't2', state: 'normal', priority: 2, message: '', value: null, limit: 11.3,
    active: false, raisedAt: T0 + 70_000, clearedAt: null, acknowledgedAt: null, acknowledgedBy: null, acknowledgeComment: null,
    shelvedUntil: null, shelvedBy: null, shelveReason: null, seq: 7, updatedAt: T0, ...over,
  };
}

describe('OPC UA channel', () => {
  const dir = mkdtempSync(join(tmpdir(), 'tideline-opcua-'));
  const db = openSignalDb(join(dir, 'tideline.db'));
  const store = new SqliteSignalRepository(db);
  const acks: { unit: string; by: string }[] = [];
  const cfg = parseSignalsConfig({ opcua: { port: 0, securityModes: ['None'], allowAnonymous: true, heartbeatMs: 200 } }).opcua!;
  const alarmAcks: { unit: string; alarmId: string; comment: string }[] = [];
  const channel = new OpcuaChannel(cfg, store, {
    dataDir: dir,
    onEndpointAcknowledged: (unit, _l, by) => acks.push({ unit, by }),
    onAlarmAcknowledged: (unit, alarmId, comment) => alarmAcks.push({ unit, alarmId, comment }),
  });
  const dispatcher = new SignalDispatcher(store, channel, { pollMs: 20 });
  let client: TestClient;

  beforeAll(async () => {
    appendOutbox(db, U, 'batch-start', { unit: U, batch: 'D1-0042', product: 'granulate-7', t: T0, model: { versionId: 'm-3', name: 'dryer-gold', version: 3, sha256: 'ab' } }, T0);
    await channel.start();
    dispatcher.start();
    client = await connectClient(channel.endpointUrl);
  });

  afterAll(async () => {
    await client?.close();
    await dispatcher.stop();
    await channel.stop();
    db.close();
  });

  it('creates a PKI folder inside the data folder', async () => {
    const { existsSync } = await import('node:fs');
    expect(channel.pkiDir).toBe(join(dir, 'pki', 'opcua'));
    expect(existsSync(join(channel.pkiDir, 'own', 'certs'))).toBe(true);
    expect(existsSync(join(channel.pkiDir, 'trusted'))).toBe(true);
  });

  it('runs a batch to its endpoint: latched once with time and reason, acknowledged by the DCS; heartbeat; alarm event', async () => {
    const reached: DataValue[] = [];
    await client.watch(P('EndpointReached'), (dv) => reached.push(dv));
    const events: Record<string, unknown>[] = [];
    await client.watchEvents(['EventType', 'SourceName', 'ConditionName', 'Message', 'Severity', 'ActiveState.Id', 'AckedState.Id', 'Time'], (e) => { if (process.env.F_DEBUG) console.log('EVENT', e); events.push(e); });
    await until(() => reached.length >= 1, 'initial EndpointReached');
    expect(reached[0]!.value.value).toBe(false);

    // batch start delivered: batch id and model version
    await until(() => channel.state(U)?.batch === 'D1-0042', 'batch start delivered');
    expect((await client.read(P('BatchId'))).value.value).toBe('D1-0042');
    expect((await client.read(P('BatchActive'))).value.value).toBe(true);
    // before any spectrum the live values are Bad (waiting for initial data)
    expect((await client.read(P('T2'))).statusCode.equals(StatusCodes.BadWaitingForInitialData)).toBe(true);

    // live results
    for (let seq = 1; seq <= 5; seq++) channel.onResult(U, result(seq), { batch: 'D1-0042' });
    const t2 = await client.read(P('T2'));
    expect(t2.value.value).toBe(4);
    expect(t2.statusCode.equals(StatusCodes.Good)).toBe(true);
    expect((await client.read(P('T2Limit'))).value.value).toBe(11.3);
    expect((await client.read(P('Property'))).value.value).toBeCloseTo(6 - 5 / 60, 12);
    expect((await client.read(P('ModelVersion'))).value.value).toBe('dryer-gold v3');

    // a spectrum far outside the model: values Uncertain
    channel.onResult(U, result(6, { t2: 80 }), { batch: 'D1-0042' });
    expect((await client.read(P('T2'))).statusCode.equals(StatusCodes.UncertainSubNormal)).toBe(true);
    expect((await client.read(P('Quality'))).value.value).toMatch(/outside the model/);

    // T² alarm raised by Tideline's own logic, then cleared and acknowledged
    const tAlarm = T0 + 70_000;
    appendOutbox(db, U, 'condition', { unit: U, batch: 'D1-0042', type: 'condition', t: tAlarm, seq: 7, change: { kind: 't2', key: 't2', active: true, message: 'T² 80.0 above limit 11.3 (2 of 3 spectra)', value: 80, limit: 11.3, priority: 2 } }, tAlarm);
    appendOutbox(db, U, 'alarm', { alarm: alarm({ active: true, state: 'active-unacknowledged', message: 'T² 80.0 above limit 11.3 (2 of 3 spectra)', value: 80, updatedAt: tAlarm }), previousState: null }, tAlarm);
    dispatcher.wake();
    await until(() => events.some((e) => e.ConditionName === 'T2Limit' && e['ActiveState.Id'] === true), 'T2Limit active event');
    const on = events.find((e) => e.ConditionName === 'T2Limit' && e['ActiveState.Id'] === true)!;
    expect(on.Message).toMatchObject({ text: 'T² 80.0 above limit 11.3 (2 of 3 spectra)' });
    expect(on.Severity).toBe(700);
    expect(on.SourceName).toBe(U);
    expect(on.EventType).toBeDefined();
    expect((on.Time as Date).getTime()).toBe(tAlarm);
    expect((await client.read(P('ActiveAlarms'))).value.value).toBe(1);
    appendOutbox(db, U, 'alarm', { alarm: alarm({ active: false, state: 'cleared-unacknowledged', message: 'T² back inside limit', value: 5, updatedAt: tAlarm + 60_000 }), previousState: 'active-unacknowledged' }, tAlarm + 60_000);
    dispatcher.wake();
    await until(() => events.some((e) => e.ConditionName === 'T2Limit' && e['ActiveState.Id'] === false), 'T2Limit cleared event');
    expect(events.filter((e) => e.ConditionName === 'T2Limit').map((e) => [e['ActiveState.Id'], e['AckedState.Id']])).toEqual([[true, false], [false, false]]);
    expect((await client.read(P('ActiveAlarms'))).value.value).toBe(1); // cleared but not yet acknowledged
    appendOutbox(db, U, 'alarm', { alarm: alarm({ active: false, state: 'normal', message: 'T² back inside limit', value: 5, acknowledgedBy: 'ana', updatedAt: tAlarm + 90_000 }), previousState: 'cleared-unacknowledged' }, tAlarm + 90_000);
    dispatcher.wake();
    await until(() => events.some((e) => e.ConditionName === 'T2Limit' && e['AckedState.Id'] === true), 'T2Limit acknowledged event');
    expect((await client.read(P('ActiveAlarms'))).value.value).toBe(0);

    // endpoint: nearing → settling → done → signalled
    const tDone = T0 + 41 * 60_000 + 10_000;
    const reason = 'moisture 1.9 % w/w ≤ 2.0 % w/w; moving-block SD 0.004 ≤ 0.01';
    for (const [from, to, t] of [['running', 'nearing', tDone - 300_000], ['nearing', 'settling', tDone - 30_000], ['settling', 'done', tDone], ['done', 'signalled', tDone + 1000]] as const) {
      appendOutbox(db, U, 'endpoint-state', { from, to, t, seq: 250, reason: to === 'done' ? reason : `${to}`, batch: 'D1-0042' }, t);
    }
    dispatcher.wake();
    await until(() => reached.some((dv) => dv.value.value === true), 'EndpointReached true');
    await until(() => channel.state(U)?.endpoint.state === 'signalled', 'all endpoint events delivered');
    expect(reached.filter((dv) => dv.value.value === true)).toHaveLength(1);
    expect(((await client.read(P('EndpointTime'))).value.value as Date).toISOString()).toBe(new Date(tDone).toISOString());
    expect((await client.read(P('EndpointReason'))).value.value).toBe(reason);
    expect((await client.read(P('EndpointState'))).value.value).toBe('signalled');

    // a restart of delivery re-reading the same events does not latch again
    expect(channel.latch(U)).toMatchObject({ reached: 1, reached_at: tDone });

    // heartbeat advances
    const hb1 = (await client.read(P('Heartbeat'))).value.value as number;
    let hb2 = hb1;
    for (let i = 0; i < 100 && hb2 <= hb1; i++) {
      await new Promise((r) => setTimeout(r, 50));
      hb2 = (await client.read(P('Heartbeat'))).value.value as number;
    }
    expect(hb2).toBeGreaterThan(hb1);

    // the DCS acknowledges
    expect(await client.write(P('EndpointAcknowledge'), DataType.Boolean, true)).toMatch(/Good/);
    await until(() => reached[reached.length - 1]!.value.value === false, 'EndpointReached reset by the acknowledge');
    expect(acks).toEqual([{ unit: U, by: 'opcua-client' }]);
    expect(channel.latch(U)).toMatchObject({ reached: 0, acknowledged_by: 'opcua-client' });
    expect(reached.filter((dv) => dv.value.value === true)).toHaveLength(1);
  }, 180_000);

  it('marks live values Bad when the analyzer reports a failure (NE 107) and raises AnalyzerFault', async () => {
    const events: Record<string, unknown>[] = [];
    await client.watchEvents(['ConditionName', 'ActiveState.Id', 'AckedState.Id', 'Message', 'EventId', 'ConditionId'], (e) => events.push(e));
    const t = T0 + 50 * 60_000;
    appendOutbox(db, U, 'alarm', { alarm: alarm({ key: 'lamp', kind: 'analyzer', state: 'active-unacknowledged', active: true, priority: 1, message: 'lamp failure reported', value: 1, limit: 0, updatedAt: t }), previousState: null }, t);
    dispatcher.wake();
    await until(() => events.some((e) => e.ConditionName === 'AnalyzerFault' && e['ActiveState.Id'] === true), 'AnalyzerFault event');
    expect((await client.read(P('AnalyzerStatus'))).value.value).toBe(1);
    expect((await client.read(P('T2'))).statusCode.equals(StatusCodes.BadSensorFailure)).toBe(true);

    // the DCS operator acknowledges the condition over OPC UA: passed on to Tideline's alarm by id
    const on = events.find((e) => e.ConditionName === 'AnalyzerFault' && e['ActiveState.Id'] === true)!;
    const sc = await client.session.acknowledgeCondition(on.ConditionId as NodeId, on.EventId as Buffer, 'seen in the control room');
    expect(sc.toString()).toMatch(/Good/);
    await until(() => alarmAcks.length === 1, 'acknowledge passed on');
    await until(() => events.some((e) => e.ConditionName === 'AnalyzerFault' && e['AckedState.Id'] === true), 'the acknowledged condition event');
    expect(alarmAcks[0]).toEqual({ unit: U, alarmId: 'alarm-lamp', comment: 'seen in the control room' });
    // Tideline's acknowledged state comes back through the outbox; the condition does not flip again
    appendOutbox(db, U, 'alarm', { alarm: alarm({ key: 'lamp', kind: 'analyzer', state: 'active-acknowledged', active: true, priority: 1, message: 'lamp failure reported', acknowledgedBy: 'opcua-client', updatedAt: t + 5000 }), previousState: 'active-unacknowledged' }, t + 5000);
    dispatcher.wake();
    await until(() => channel.state(U)!.alarms.some((a) => a.key === 'lamp' && a.state === 'active-acknowledged'), 'acknowledged state delivered');
    await new Promise((r) => setTimeout(r, 300)); // a second acked event would arrive within a few publish intervals
    expect(events.filter((e) => e.ConditionName === 'AnalyzerFault' && e['AckedState.Id'] === true)).toHaveLength(1);
  });
  it('mirrors the unit model-health alarm as the ModelHealth condition (off-normal, priority 4 → severity 300) and ModelHealthFailing', async () => {
    const events: Record<string, unknown>[] = [];
    await client.watchEvents(['ConditionName', 'ActiveState.Id', 'Severity', 'Message'], (e) => events.push(e));
    const t = T0 + 55 * 60_000;
    const health = { key: 'model-health', kind: 'model-health' as const, priority: 4 as const, batch: null, message: 'model health of dryer v1 on D1: q-rate — 9 of 20 batches left the Q limit', value: 9, limit: 7 };
    appendOutbox(db, U, 'alarm', { alarm: alarm({ ...health, state: 'active-unacknowledged', active: true, updatedAt: t }), previousState: null }, t);
    dispatcher.wake();
    await until(() => events.some((e) => e.ConditionName === 'ModelHealth' && e['ActiveState.Id'] === true), 'ModelHealth event');
    const on = events.find((e) => e.ConditionName === 'ModelHealth' && e['ActiveState.Id'] === true)!;
    expect(on.Severity).toBe(300);
    expect(String((on.Message as { text?: string }).text ?? on.Message)).toMatch(/q-rate/);
    expect((await client.read(P('ModelHealthFailing'))).value.value).toBe(true);
    // every test passes again: the condition returns to normal
    appendOutbox(db, U, 'alarm', { alarm: alarm({ ...health, message: 'model health of dryer v1 on D1: every test passes again', state: 'cleared-unacknowledged', active: false, updatedAt: t + 60_000 }), previousState: 'active-unacknowledged' }, t + 60_000);
    dispatcher.wake();
    await until(() => events.some((e) => e.ConditionName === 'ModelHealth' && e['ActiveState.Id'] === false), 'ModelHealth cleared');
    expect((await client.read(P('ModelHealthFailing'))).value.value).toBe(false);
  });
  it('mirrors suppression by state (SuppressedState, SuppressedOrShelved) when Tideline reports it', async () => {
    const events: Record<string, unknown>[] = [];
    await client.watchEvents(['ConditionName', 'ActiveState.Id', 'SuppressedState.Id', 'SuppressedOrShelved', 'Message'], (e) => events.push(e));
    const Q = P('QLimit');
    expect((await client.read(`${Q}/0:SuppressedState/0:Id`)).value.value).toBe(false);
    const t = T0 + 60 * 60_000;
    // the analyzer is in NE 107 function check: the Q alarm's condition is present but suppressed by design
    appendOutbox(db, U, 'alarm', { alarm: { ...alarm({ key: 'q', kind: 'q', state: 'normal', active: true, message: 'Q 0.05 above limit 0.01', value: 0.05, limit: 0.01, updatedAt: t }), suppressedBy: ['function-check'] }, previousState: null }, t);
    dispatcher.wake();
    await until(() => events.some((e) => e.ConditionName === 'QLimit' && e['SuppressedState.Id'] === true), 'QLimit suppressed event');
    expect(events.find((e) => e.ConditionName === 'QLimit')).toMatchObject({ 'ActiveState.Id': true, SuppressedOrShelved: true });
    expect((await client.read(`${Q}/0:SuppressedState/0:Id`)).value.value).toBe(true);
    expect((await client.read(`${Q}/0:SuppressedOrShelved`)).value.value).toBe(true);
    expect(((await client.read(`${Q}/0:ShelvingState/0:CurrentState`)).value.value as { text: string }).text).toBe('Unshelved');
    // function check over: annunciated again
    appendOutbox(db, U, 'alarm', { alarm: { ...alarm({ key: 'q', kind: 'q', state: 'active-unacknowledged', active: true, message: 'Q 0.05 above limit 0.01', value: 0.05, limit: 0.01, updatedAt: t + 10_000 }), suppressedBy: [] }, previousState: 'normal' }, t + 10_000);
    dispatcher.wake();
    await until(() => events.some((e) => e.ConditionName === 'QLimit' && e['SuppressedState.Id'] === false), 'QLimit unsuppressed event');
    expect((await client.read(`${Q}/0:SuppressedOrShelved`)).value.value).toBe(false);
  });
});
