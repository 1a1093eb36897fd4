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
  // The simulator stamps process time, ahead of the wall clock when it streams faster than real time.
  ts = await startTestServer({ ingest: { maxAheadMs: null } }, { units: ['dryer-1'], analyzer: 'sim-dryer-1' });
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
  it('a process clock started in the past replays fast and dates nothing ahead of the wall clock; one started ahead waits for it', async () => {
    const c = new AnalyzerClient({ url: ts.wsUrl + '/ingest', token: ts.token, analyzer: 'sim-dryer-1', axis: simulateDryerBatch({ seed: 1, id: 'x' }).axis, processClockStart: Date.now() - 10 * 86_400_000 });
    await c.start();
    const past = simulateDryerBatch({ seed: 13, intervalS: 60, id: 'SIM-CLOCK-PAST' });
    const t0 = Date.now();
    await c.sendBatch(past, { speed: 600, notAheadOfWallClock: true });
    const row = (await ts.server.ctx.storage.getBatch('SIM-CLOCK-PAST'))!;
    // dated in the past, by process time, and never after its receipt
    expect(row.startT).toBeLessThan(t0);
    expect(row.endT!).toBeLessThanOrEqual(Date.now());
    expect(row.startT).toBeLessThanOrEqual(row.createdAt);
    expect(row.endT! - row.startT).toBe(past.times[past.times.length - 1]! - past.start);
    await c.close();

    // A clock 1.5 s ahead: without the option every time would be dated ahead of its receipt.
    const c2 = new AnalyzerClient({ url: ts.wsUrl + '/ingest', token: ts.token, analyzer: 'sim-dryer-1', axis: past.axis, processClockStart: Date.now() + 1500 });
    await c2.start();
    const short = simulateDryerBatch({ seed: 14, intervalS: 0.1, id: 'SIM-CLOCK-AHEAD' });
    const first = { ...short, spectra: short.spectra.slice(0, 10), times: short.times.slice(0, 10), truth: { ...short.truth, dropped: [], endpointIndex: null } };
    await c2.sendBatch(first, { speed: 0, notAheadOfWallClock: true });
    const row2 = (await ts.server.ctx.storage.getBatch('SIM-CLOCK-AHEAD'))!;
    expect(row2.startT).toBeLessThanOrEqual(row2.createdAt);
    expect(row2.endT!).toBeLessThanOrEqual(Date.now());
    await c2.close();
  }, 120_000);
});
