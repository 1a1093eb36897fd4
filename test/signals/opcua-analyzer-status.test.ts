/**
 * AnalyzerStatus (NAMUR NE 107) and the status codes of the live values, read by a node-opcua client
 * as the DCS from the full server, while the analyzer speaks the public ingest protocol (/ingest).
 * The analyzer reports failure, then function check (probe cleaning) and falls silent; Tideline's
 * stale-data alarm is suppressed then (AnalyzerStatus stays function check). The analyzer reports
 * good while still silent: AnalyzerStatus turns failure with BadNoCommunication (Tideline receives
 * nothing), T², Q, Property and Progress turn UncertainLastUsableValue; the next spectrum brings
 * everything back to Good. Status code meanings: IEC 62541-4 §7.34 and -8 (DataAccess).
 *
 * Staleness is reached on the server's clock (injected, advanced by the test), not by waiting.
 */
import { StatusCodes, type DataValue, type StatusCode } from 'node-opcua';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch } from '../../simulators/batch.ts';
import { Peer, type TestServer } from '../server/helpers.ts';
import { startOpcuaHarness, until, type OpcuaHarness } from './helpers/opcua-harness.ts';

const U = 'dryer-1';
const LIVE = ['T2', 'Q', 'Property', 'Progress'];

describe('OPC UA AnalyzerStatus and value status codes with the full server', () => {
  let h: OpcuaHarness;
  let ts: TestServer;
  let events: Record<string, unknown>[];

  beforeAll(async () => {
    h = await startOpcuaHarness({ ingest: { staleAfterMs: 60_000 }, eventFields: ['ConditionName', 'ActiveState.Id', 'SuppressedOrShelved'], modelOn: U });
    ts = h.ts;
    events = h.events;
  }, 120_000);

  afterAll(async () => {
    await h?.stop();
  });

  const read = (name: string): Promise<DataValue> => h.client.read(h.path(U, name));
  const reaches = (name: string, value: unknown, code: StatusCode): Promise<DataValue> => h.reaches(U, name, value, code);
  const liveCodes = async () => Promise.all(LIVE.map(async (n) => (await read(n)).statusCode.name));
  const liveReach = (code: StatusCode) => until(async () => (await liveCodes()).every((c) => c === code.name), `T2, Q, Property, Progress ${code.name}`).catch(async (e: Error) => {
    throw new Error(`${e.message}; last read ${(await liveCodes()).join(', ')}`);
  });

  it('reports failure and function check with Good, failure with BadNoCommunication while stale, and recovers', async () => {
    const batch = simulateDryerBatch({ seed: 21, intervalS: 60, id: 'D1-NE107' });
    const peer = new Peer(ts.wsUrl, ts.token);
    await peer.open();
    expect((await peer.hello('nir-1', 1, batch.axis)).type).toBe('welcome');
    let seq = 1;
    peer.send({ type: 'batch-start', seq, t: batch.times[0]! - 1000, unit: U, batch: batch.id, product: 'granule A' });
    for (let i = 0; i < 5; i++) peer.sendFrame(++seq, batch.times[i]!, batch.spectra[i]!);
    await peer.waitAck(seq);

    // a good batch, a good analyzer: everything Good
    await reaches('AnalyzerStatus', 0, StatusCodes.Good);
    await liveReach(StatusCodes.Good);
    expect((await read('Quality')).value.value).toBe('');

    // the analyzer reports a failure (NE 107 F): its own report, Good; the values are Bad
    peer.send({ type: 'analyzer-status', seq: ++seq, t: batch.times[4]! + 1000, status: 'failure', code: 'E17', detail: 'lamp' });
    await peer.waitAck(seq);
    await reaches('AnalyzerStatus', 1, StatusCodes.Good);
    expect((await read('AnalyzerStatusText')).value.value).toBe('failure');
    await reaches('AnalyzerFaultActive', true, StatusCodes.Good);
    await liveReach(StatusCodes.BadSensorFailure);

    // function check (probe cleaning, NE 107 C): values BadOutOfService
    peer.send({ type: 'analyzer-status', seq: ++seq, t: batch.times[4]! + 2000, status: 'function-check', code: 'probe-cleaning' });
    await peer.waitAck(seq);
    await reaches('AnalyzerStatus', 2, StatusCodes.Good);
    await reaches('AnalyzerFaultActive', false, StatusCodes.Good);
    await liveReach(StatusCodes.BadOutOfService);

    // silent beyond ingest.staleAfterMs on the server's clock: the stale condition is tracked but
    // suppressed (function check announced the silence), AnalyzerStatus stays function check
    h.advance(120_000);
    await reaches('DataStale', true, StatusCodes.Good);
    await reaches('AnalyzerStatus', 2, StatusCodes.Good);
    expect((await read('AnalyzerStatusText')).value.value).toBe('function-check');
    await until(() => events.some((e) => e.ConditionName === 'DataStale' && e['ActiveState.Id'] === true && e.SuppressedOrShelved === true), 'DataStale suppressed');
    await liveReach(StatusCodes.BadOutOfService);

    // the analyzer reports good but still sends no spectrum: Tideline's own conclusion, failure with
    // BadNoCommunication, the reason in Quality; the values are the last usable ones
    peer.send({ type: 'analyzer-status', seq: ++seq, t: batch.times[4]! + 3000, status: 'good' });
    await peer.waitAck(seq);
    await reaches('AnalyzerStatus', 1, StatusCodes.BadNoCommunication);
    const text = await read('AnalyzerStatusText');
    expect([text.value.value, text.statusCode.name]).toEqual(['failure', 'BadNoCommunication']);
    expect((await read('AnalyzerFaultActive')).value.value).toBe(false); // the analyzer reports no fault
    await liveReach(StatusCodes.UncertainLastUsableValue);
    const quality = (await read('Quality')).value.value as string;
    expect(quality).toMatch(/^data stale: no data from analyzer nir-1 for \d+ s during batch D1-NE107 \(limit 60 s\)$/);
    await until(() => events.some((e) => e.ConditionName === 'DataStale' && e['ActiveState.Id'] === true && e.SuppressedOrShelved === false), 'DataStale annunciated');

    // the next spectrum: back to the analyzer's report, every value Good
    peer.sendFrame(++seq, batch.times[5]!, batch.spectra[5]!);
    await peer.waitAck(seq);
    await reaches('DataStale', false, StatusCodes.Good);
    await reaches('AnalyzerStatus', 0, StatusCodes.Good);
    expect((await read('AnalyzerStatusText')).value.value).toBe('good');
    await liveReach(StatusCodes.Good);
    expect((await read('Quality')).value.value).toBe('');
    await until(() => events.some((e) => e.ConditionName === 'DataStale' && e['ActiveState.Id'] === false), 'DataStale cleared');
    peer.close();
  }, 180_000);
});
