/**
 * The analyzer client reports NAMUR NE 107 status windows through the public protocol: function check
 * while the probe is cleaned (no spectra in the window), good again afterwards; the real server stores both.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch } from '../../simulators/dryer.ts';
import { AnalyzerClient, parseStatusWindow } from '../../simulators/stream-client.ts';
import { startTestServer, type TestServer, sqliteDb } from '../server/helpers.ts';

let ts: TestServer;
beforeAll(async () => {
  // The simulator stamps process time, ahead of the wall clock when it streams faster than real time.
  ts = await startTestServer({ ingest: { maxAheadMs: null } }, { units: ['dryer-1'], analyzer: 'sim-dryer-1' });
});
afterAll(async () => {
  await ts?.stop();
});

describe('status windows', () => {
  it('parses STATUS@FROM-TO[:code] and names a bad one', () => {
    expect(parseStatusWindow('function-check@20-25:probe-cleaning')).toEqual({ status: 'function-check', fromMin: 20, toMin: 25, code: 'probe-cleaning' });
    expect(() => parseStatusWindow('ok@1-2')).toThrow(/status must be one of failure, function-check/);
    expect(() => parseStatusWindow('failure@5-2')).toThrow(/must come after the start/);
    expect(() => parseStatusWindow('failure')).toThrow(/STATUS@FROM-TO/);
  });

  it('sends function check and good around a probe-cleaning window; no spectra inside it', async () => {
    const batch = simulateDryerBatch({ seed: 14, intervalS: 30, id: 'SIM-STATUS-1' });
    const c = new AnalyzerClient({ url: ts.wsUrl + '/ingest', token: ts.token, analyzer: 'sim-dryer-1', axis: batch.axis, window: 16 });
    await c.start();
    await c.sendBatch(batch, { speed: 0, statusWindows: [parseStatusWindow('function-check@10-15:probe-cleaning')] });
    await c.close();
    expect(c.stats().errors).toEqual([]);
    const db = sqliteDb(ts.server.ctx.storage);
    const rows = db.prepare('SELECT status, code, unit, t FROM analyzer_status ORDER BY id').all() as { status: string; code: string | null; unit: string; t: number }[];
    expect(rows.map((r) => [r.status, r.code, r.unit])).toEqual([['function-check', 'probe-cleaning', 'dryer-1'], ['good', null, 'dryer-1']]);
    const b = await ts.server.ctx.storage.getBatch('SIM-STATUS-1');
    const spectra = await ts.server.ctx.storage.readSpectra('SIM-STATUS-1', 0, 1e9, 10_000);
    const inWindow = spectra.filter((s) => s.t >= rows[0]!.t && s.t < rows[1]!.t);
    expect(inWindow).toEqual([]);
    expect(spectra.length).toBe(batch.spectra.length - 10); // 10 scans of 30 s in 5 minutes
    expect(b!.status).toBe('ended');
  }, 60_000);
});
