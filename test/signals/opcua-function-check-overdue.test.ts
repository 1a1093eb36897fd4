/**
 * A function check that outlasts ingest.functionCheckMaxMs, seen by a node-opcua client as the DCS
 * on the full server while the analyzer speaks the public ingest protocol (/ingest). During the
 * function check (probe cleaning) the out-of-model spectra and the silence that follows raise
 * conditions that are suppressed (A&C SuppressedOrShelved true). Past the limit Tideline raises its
 * own analyzer alarm function-check-overdue: the AnalyzerFault condition turns active with its
 * message, AnalyzerStatus reads failure (NE 107 F; BadNoCommunication since no spectrum arrives),
 * and the suppressed conditions are annunciated (SuppressedOrShelved false). The analyzer reports
 * good: AnalyzerFault clears. Alarms & Conditions: IEC 62541-9; status codes IEC 62541-4 §7.34.
 *
 * The limit is reached on the server's clock (injected, advanced by the test), not by waiting.
 */
import { StatusCodes, type DataValue, type StatusCode } from 'node-opcua';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch } from '../../simulators/batch.ts';
import { Peer, type TestServer } from '../server/helpers.ts';
import { startOpcuaHarness, until, type OpcuaHarness } from './helpers/opcua-harness.ts';

const U = 'dryer-1';
const MIN = 60_000;

describe('OPC UA: function check beyond ingest.functionCheckMaxMs with the full server', () => {
  let h: OpcuaHarness;
  let ts: TestServer;
  let events: Record<string, unknown>[];

  beforeAll(async () => {
    h = await startOpcuaHarness({ ingest: { staleAfterMs: MIN, functionCheckMaxMs: 15 * MIN }, eventFields: ['ConditionName', 'ActiveState.Id', 'SuppressedOrShelved', 'Message'], modelOn: U });
    ts = h.ts;
    events = h.events;
  }, 120_000);

  afterAll(async () => {
    await h?.stop();
  });

  const read = (name: string): Promise<DataValue> => h.client.read(h.path(U, name));
  const reaches = async (name: string, value: unknown, code: StatusCode): Promise<void> => {
    await h.reaches(U, name, value, code);
  };
  const seen = (name: string, active: boolean, suppressed: boolean | null) =>
    events.some((e) => e.ConditionName === name && e['ActiveState.Id'] === active && (suppressed === null || e.SuppressedOrShelved === suppressed));
  const message = (e: Record<string, unknown>) => String((e.Message as { text?: string } | undefined)?.text ?? '');

  it('AnalyzerFault goes active with the overdue message, suppressed conditions are annunciated, good clears it', async () => {
    const batch = simulateDryerBatch({ seed: 5, intervalS: 60, id: 'D1-FC' });
    const peer = new Peer(ts.wsUrl, ts.token);
    await peer.open();
    expect((await peer.hello('nir-1', 1, batch.axis)).type).toBe('welcome');
    let seq = 0;
    peer.send({ type: 'batch-start', seq, t: batch.start, unit: U, batch: batch.id, product: 'granule A' });
    for (let i = 0; i < 3; i++) peer.sendFrame(++seq, batch.times[i]!, batch.spectra[i]!);
    peer.send({ type: 'analyzer-status', seq: ++seq, t: batch.times[2]! + 1, status: 'function-check', code: 'probe-cleaning' });
    // a fouled window during the cleaning: a strong baseline offset and slope, far outside the model
    for (let i = 3; i < 9; i++) peer.sendFrame(++seq, batch.times[i]!, Array.from(batch.spectra[i]!, (x, k) => x + 0.3 + 0.0005 * k));
    await peer.waitAck(seq);
    await reaches('AnalyzerStatus', 2, StatusCodes.Good);

    // silent 2 min (beyond staleAfterMs, within the limit): DataStale active but suppressed
    h.advance(2 * MIN);
    await until(() => seen('DataStale', true, true), 'DataStale active, suppressed');
    await reaches('AnalyzerStatus', 2, StatusCodes.Good);
    const modelSuppressed = events.filter((e) => ['T2Limit', 'QLimit'].includes(e.ConditionName as string) && e['ActiveState.Id'] === true && e.SuppressedOrShelved === true);
    expect(modelSuppressed.length).toBeGreaterThan(0);
    expect(seen('AnalyzerFault', true, null)).toBe(false);

    // 16 min in function check: Tideline's own analyzer alarm, the suppression lapses
    h.advance(14 * MIN);
    await until(() => seen('AnalyzerFault', true, false), 'AnalyzerFault active');
    const fault = events.find((e) => e.ConditionName === 'AnalyzerFault' && e['ActiveState.Id'] === true)!;
    expect(message(fault)).toMatch(/analyzer nir-1 has been in function check \(NE 107 C\) for 16(\.\d)? min during batch D1-FC, beyond the limit of 15 min \(ingest\.functionCheckMaxMs\)/);
    await reaches('AnalyzerFaultActive', true, StatusCodes.Good);
    // failure: Tideline's analyzer alarm stands, and no spectrum arrives (BadNoCommunication)
    await reaches('AnalyzerStatus', 1, StatusCodes.BadNoCommunication);
    await until(() => seen('DataStale', true, false), 'DataStale annunciated');
    for (const name of new Set(modelSuppressed.map((e) => e.ConditionName as string))) {
      await until(() => seen(name, true, false), `${name} annunciated`);
    }

    // the analyzer reports good: AnalyzerFault clears; the next spectrum ends the silence
    peer.send({ type: 'analyzer-status', seq: ++seq, t: batch.times[8]! + 1, status: 'good' });
    await peer.waitAck(seq);
    await until(() => seen('AnalyzerFault', false, null), 'AnalyzerFault cleared');
    await reaches('AnalyzerFaultActive', false, StatusCodes.Good);
    peer.sendFrame(++seq, batch.times[9]!, batch.spectra[9]!);
    await peer.waitAck(seq);
    await reaches('AnalyzerStatus', 0, StatusCodes.Good);
    peer.close();
  }, 180_000);
});
