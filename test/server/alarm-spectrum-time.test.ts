/**
 * Alarms name the analyzer's time of the spectrum behind them beside the server's time of receipt:
 * a batch replayed from an analyzer's buffer (spectra taken two hours before they arrive) raises an
 * alarm whose raisedSpectrumT is the time of the spectrum that raised it, and a cleared alarm's
 * spectrumT the time of the spectrum that cleared it (the one its seq names), as stored and read back.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch } from '../../simulators/batch.ts';
import { Peer, login, startTestServer, type Session, type TestServer } from './helpers.ts';
import { buildSmallDryerModel, installModel } from './model-fixture.ts';

let ts: TestServer;
let viewer: Session;
const batch = simulateDryerBatch({ seed: 5, id: 'late', intervalS: 60, start: Date.now() - 2 * 3600_000 });
beforeAll(async () => {
  ts = await startTestServer({}, { units: ['dryer-1'] });
  const { model, text } = buildSmallDryerModel();
  await installModel(ts.server.ctx.storage, text, model, 'dryer-1');
  await ts.server.ctx.ingest.refreshDeployment('dryer-1');
  viewer = await login(ts, 'viewer');
}, 120_000);
afterAll(async () => {
  await ts?.stop();
});

describe("alarms carry the spectrum's time", () => {
  it('raised and cleared by spectra taken two hours before they arrive', async () => {
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    await p.hello('nir-1', 1, batch.axis);
    p.send({ type: 'batch-start', seq: 0, t: batch.start, unit: 'dryer-1', batch: 'late', product: 'granule A' });
    const tOf = new Map<number, number>();
    let seq = 1;
    const send = (i: number, offset: number) => {
      tOf.set(seq, batch.times[i]!);
      p.send({ type: 'spectrum', seq: seq++, t: batch.times[i]!, values: Array.from(batch.spectra[i]!, (x, k) => x + offset * (1 + 0.001 * k)) });
    };
    for (let i = 0; i < 5; i++) send(i, 0);
    for (let i = 5; i < 15; i++) send(i, 0.3); // a fouled window, far outside the model
    for (let i = 15; i < 40; i++) send(i, 0);
    await p.waitAck(seq - 1);
    const before = Date.now();
    const items = (await viewer.get('/api/alarms?batch=late&limit=100')).body.items as any[];
    const q = items.find((a) => a.key === 'q');
    expect(q, JSON.stringify(items.map((a) => [a.key, a.state]))).toBeDefined();
    // received now (server clock), taken two hours ago (analyzer clock)
    expect(before - q.raisedAt).toBeLessThan(3600_000);
    expect(q.raisedAt - q.raisedSpectrumT).toBeGreaterThan(3600_000);
    expect([...tOf.values()]).toContain(q.raisedSpectrumT);
    const raisedSeq = [...tOf].find(([, t]) => t === q.raisedSpectrumT)![0];
    expect(raisedSeq).toBeGreaterThanOrEqual(6);
    expect(raisedSeq).toBeLessThanOrEqual(15);
    // cleared once the window is clean again: seq and spectrumT name the clearing spectrum
    expect(q.active).toBe(false);
    expect(q.clearedAt).not.toBeNull();
    expect(q.spectrumT).toBe(tOf.get(q.seq));
    expect(q.seq).toBeGreaterThan(15);
    p.close();
  }, 120_000);
});
