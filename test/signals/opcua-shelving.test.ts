/**
 * Shelving mirrored to OPC UA Alarms & Conditions (IEC 62541-9 ShelvedStateMachineType), full server
 * and a node-opcua client as the DCS. The analyzer falls silent, the server raises its stale-data
 * alarm (condition DataStale); an operator shelves it through the Tideline API (time-limited, with a
 * reason, audited) and the client sees ShelvingState go TimedShelved with UnshelveTime counting down
 * to Tideline's expiry and SuppressedOrShelved true; unshelving, and a shelve that runs out on
 * Tideline's clock, bring it back to Unshelved. Shelving from the DCS over OPC UA is refused and
 * leaves Tideline's alarm as it was.
 */
import { AttributeIds, DataType, StatusCodes, type LocalizedText, type NodeId } from 'node-opcua';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { login, Peer, type TestServer } from '../server/helpers.ts';
import type { TestClient } from './helpers/opcua-client.ts';
import { startOpcuaHarness, until, type OpcuaHarness } from './helpers/opcua-harness.ts';

const U = 'dryer-1';
const C = `/Objects/1:Tideline/1:${U}/1:DataStale`;

describe('OPC UA condition shelving mirrors Tideline shelving', () => {
  let h: OpcuaHarness;
  let ts: TestServer;
  let client: TestClient;
  let events: Record<string, unknown>[];

  beforeAll(async () => {
    h = await startOpcuaHarness({ ingest: { staleAfterMs: 1500 }, eventFields: ['ConditionName', 'ActiveState.Id', 'AckedState.Id', 'SuppressedOrShelved', 'Comment', 'ClientUserId', 'Message'] });
    ts = h.ts;
    client = h.client;
    events = h.events;
  }, 60_000);

  afterAll(async () => {
    await h?.stop();
  });

  const currentState = async () => ((await client.read(`${C}/0:ShelvingState/0:CurrentState`)).value.value as LocalizedText).text;
  const unshelveTime = () => client.read(`${C}/0:ShelvingState/0:UnshelveTime`);
  const suppressedOrShelved = async () => (await client.read(`${C}/0:SuppressedOrShelved`)).value.value as boolean;

  it('shows a Tideline shelve, its end by unshelve and by expiry; refuses shelving from OPC UA', async () => {
    // a batch starts, one spectrum arrives, then the analyzer falls silent: DataStale active
    const axis = Array.from({ length: 16 }, (_, i) => 1100 + 50 * i);
    const peer = new Peer(ts.wsUrl, ts.token);
    await peer.open();
    expect((await peer.hello('nir-1', 1, axis)).type).toBe('welcome');
    const t0 = Date.now();
    peer.send({ type: 'batch-start', seq: 1, t: t0, unit: U, batch: 'D1-SHELVE', product: 'granule A' });
    peer.sendFrame(2, t0 + 1000, axis.map((_, i) => 0.4 + 0.01 * i));
    await peer.waitAck(2);
    await until(() => events.some((e) => e.ConditionName === 'DataStale' && e['ActiveState.Id'] === true), 'DataStale active');
    expect(await currentState()).toBe('Unshelved');
    expect((await unshelveTime()).statusCode.equals(StatusCodes.BadConditionNotShelved)).toBe(true);
    expect(await suppressedOrShelved()).toBe(false);

    const operator = await login(ts, 'operator', 'ana');
    const list = await operator.get(`/api/alarms?unit=${U}`);
    const stale = (list.body.items as { id: string; key: string }[]).find((a) => a.key === 'stale')!;
    expect(stale).toBeDefined();

    // the DCS may not shelve: the methods are not executable and a call is refused
    const timedShelve = await client.nodeId(`${C}/0:ShelvingState/0:TimedShelve`);
    const userExecutable = await client.session.read({ nodeId: timedShelve, attributeId: AttributeIds.UserExecutable });
    expect(userExecutable.value.value).toBe(false);
    const call = await client.session.call({
      objectId: await client.nodeId(`${C}/0:ShelvingState`),
      methodId: timedShelve,
      inputArguments: [{ dataType: DataType.Double, value: 60_000 }],
    });
    expect(call.statusCode.equals(StatusCodes.BadNotExecutable)).toBe(true);
    for (const m of ['OneShotShelve', 'Unshelve']) {
      const r = await client.session.call({ objectId: await client.nodeId(`${C}/0:ShelvingState`), methodId: await client.nodeId(`${C}/0:ShelvingState/0:${m}`), inputArguments: [] });
      expect(r.statusCode.equals(StatusCodes.BadNotExecutable), m).toBe(true);
    }
    expect(await currentState()).toBe('Unshelved');
    expect((await operator.get(`/api/alarms?unit=${U}`)).body.items.find((a: { id: string }) => a.id === stale.id).shelvedUntil).toBeNull();

    // shelved in Tideline for 5 minutes with a reason: TimedShelved, UnshelveTime ≤ 5 min
    const reason = 'lamp swap in progress, maintenance informed';
    const shelved = await operator.post(`/api/alarms/${stale.id}/shelve`, { minutes: 5, reason });
    expect(shelved.status).toBe(200);
    await until(async () => (await currentState()) === 'TimedShelved', 'TimedShelved');
    const left = await unshelveTime();
    expect(left.statusCode.equals(StatusCodes.Good)).toBe(true);
    expect(left.value.value as number).toBeGreaterThan(4 * 60_000);
    expect(left.value.value as number).toBeLessThanOrEqual(5 * 60_000);
    expect(shelved.body.shelvedUntil - ts.server.ctx.now()).toBeGreaterThanOrEqual((left.value.value as number) - 1000);
    expect(await suppressedOrShelved()).toBe(true);
    await until(() => events.some((e) => e.ConditionName === 'DataStale' && e.SuppressedOrShelved === true), 'shelved event');
    const ev = events.find((e) => e.ConditionName === 'DataStale' && e.SuppressedOrShelved === true)!;
    expect((ev.Comment as LocalizedText).text).toContain(reason);
    expect((ev.Comment as LocalizedText).text).toContain('ana');
    expect(ev.ClientUserId).toBe('ana');
    expect(ev['ActiveState.Id']).toBe(true); // the condition itself is still present, only hidden
    const audit = await (await login(ts, 'administrator')).get('/api/audit?action=alarm.shelve');
    expect(JSON.stringify(audit.body)).toContain(`alarm:${stale.id}`);

    // unshelved in Tideline: back to Unshelved
    expect((await operator.post(`/api/alarms/${stale.id}/unshelve`, {})).status).toBe(200);
    await until(async () => (await currentState()) === 'Unshelved', 'Unshelved after unshelve');
    expect(await suppressedOrShelved()).toBe(false);
    expect((await unshelveTime()).statusCode.equals(StatusCodes.BadConditionNotShelved)).toBe(true);

    // shelved for 1 minute; Tideline's clock passes the end: the shelve expires and the condition follows
    expect((await operator.post(`/api/alarms/${stale.id}/shelve`, { minutes: 1, reason: 'sample drawn' })).status).toBe(200);
    await until(async () => (await currentState()) === 'TimedShelved', 'TimedShelved again');
    const n = events.length;
    h.advance(2 * 60_000);
    await until(async () => (await currentState()) === 'Unshelved', 'Unshelved after expiry');
    await until(() => events.slice(n).some((e) => e.ConditionName === 'DataStale' && e.SuppressedOrShelved === false), 'expiry event');
    const after = (await operator.get(`/api/alarms?unit=${U}`)).body.items.find((a: { id: string }) => a.id === stale.id);
    expect(after.shelvedUntil).toBeNull();
    peer.close();
  }, 120_000);
});
