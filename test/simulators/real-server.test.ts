/**
 * The analyzer client against the real Tideline server (server/, /ingest): a simulated
 * dryer batch streamed with the connection dropped mid-batch must be stored complete, in order,
 * without duplicates, with the values exactly as simulated (Float32).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch } from '../../simulators/dryer.ts';
import { AnalyzerClient } from '../../simulators/stream-client.ts';
import { startTestServer, type TestServer } from '../server/helpers.ts';

let ts: TestServer;
beforeAll(async () => {
  ts = await startTestServer({}, { units: ['dryer-1'], analyzer: 'sim-dryer-1' });
});
afterAll(async () => {
  await ts?.stop();
});

describe('AnalyzerClient → real server /ingest', () => {
  it('streams a batch with a drop-out gap and a dropped connection; the server stores every transmitted spectrum once', async () => {
    const batch = simulateDryerBatch({ seed: 12, intervalS: 30, id: 'SIM-REAL-1', faults: [{ type: 'dropout', onsetS: 600, params: { durationS: 300 } }] });
    const sent = batch.spectra.map((s, i) => ({ s, i })).filter(({ i }) => !batch.truth.dropped.includes(i));
    const c = new AnalyzerClient({ url: ts.wsUrl + '/ingest', token: ts.token, analyzer: 'sim-dryer-1', axis: batch.axis, window: 8, backoff: { initialMs: 20, maxMs: 200 } });
    await c.start();
    const done = c.sendBatch(batch, { speed: 0 });
    // Drop the connection once some entries have been acked and others are in flight.
    while (c.stats().acked < 40) await new Promise((r) => setTimeout(r, 2));
    c.dropConnection();
    await done;
    await c.close();
    expect(c.stats().reconnects).toBe(1);
    expect(c.stats().errors).toEqual([]);
    const row = await ts.server.ctx.storage.getBatch('SIM-REAL-1');
    expect(row).toMatchObject({ status: 'ended', spectrumCount: sent.length, unit: 'dryer-1' });
    const stored = await ts.server.ctx.storage.readSpectra('SIM-REAL-1', 0, 1e9, 10_000);
    expect(stored).toHaveLength(sent.length);
    stored.forEach((r, k) => {
      expect(r.seq).toBe(k + 1); // seq 0 is batch-start
      expect(Array.from(r.values)).toEqual(Array.from(sent[k]!.s));
    });
  });
});
