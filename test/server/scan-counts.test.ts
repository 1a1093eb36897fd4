/**
 * Suspect scans per batch through the public paths: a batch streamed over /ingest with a few
 * single spiked spectra (each far beyond the T² and Q limits, too short-lived to raise an alarm
 * under the on-delay) carries the count of suspect scans in the unit status Floor reads while it
 * runs (GET /api/units, openBatch) and in the batch record Review and the report read after it ended
 * (GET /api/batches/:id, the batch list, report.html). The count is checked against the per-spectrum
 * results the same server serves (GET /api/batches/:id/results), counted here independently.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch } from '../../simulators/batch.ts';
import { buildSmallDryerModel, installModel } from './model-fixture.ts';
import { Peer, login, startTestServer, type Session, type TestServer } from './helpers.ts';

let ts: TestServer;
let viewer: Session;
let p: Peer;
let seq = 0;
const b = simulateDryerBatch({ seed: 23, id: 'spiky-1', intervalS: 60 });
const n = Math.min(30, b.spectra.length - 1);
/** Spectra (by index) carrying one spike each, well apart so none confirms an alarm (on-delay 3 of 5). */
const SPIKED = [8, 16, 24];

beforeAll(async () => {
  ts = await startTestServer({}, { units: ['dryer-1'] });
  viewer = await login(ts, 'viewer');
  const { model, text } = buildSmallDryerModel(11);
  await installModel(ts.server.ctx.storage, text, model, 'dryer-1');
  await ts.server.ctx.ingest.refreshDeployment('dryer-1');
  p = new Peer(ts.wsUrl, ts.token);
  await p.open();
  await p.hello('nir-1', 1, b.axis);
  p.send({ type: 'batch-start', seq: seq++, t: b.start, unit: 'dryer-1', batch: b.id, product: 'granule A' });
  for (let i = 0; i < n; i++) {
    // a cosmic-ray-like spike: a narrow peak of 1 absorbance unit over five pixels
    const v = Float32Array.from(b.spectra[i]!, (x, j) => (SPIKED.includes(i) && j >= 100 && j < 105 ? x + 1 : x));
    p.sendFrame(seq++, b.times[i]!, v);
  }
  await p.waitAck(seq - 1, 60_000);
}, 240_000);

afterAll(async () => {
  p?.close();
  await ts?.stop();
});

async function suspectInResults(): Promise<number> {
  const r = await viewer.get(`/api/batches/${b.id}/results?fromSeq=0&toSeq=100000&limit=10000`);
  expect(r.status).toBe(200);
  return (r.body.items as { suspect: boolean }[]).filter((x) => x.suspect).length;
}

describe('suspect scans are counted per batch and served to Floor and Review', () => {
  it('while the batch runs, the unit status carries the count (Floor)', async () => {
    const expected = await suspectInResults();
    expect(expected).toBeGreaterThanOrEqual(SPIKED.length);
    const units = await viewer.get('/api/units');
    expect(units.status).toBe(200);
    const u = (units.body.items ?? units.body).find((x: { id: string }) => x.id === 'dryer-1');
    expect(u.openBatch.id).toBe(b.id);
    expect(u.openBatch.suspectCount).toBe(expected);
    expect(u.openBatch.unjudgedCount).toBe(0);
    const alarms = await viewer.get(`/api/alarms?batch=${b.id}&limit=100`);
    expect((alarms.body.items as { kind: string }[]).filter((a) => a.kind === 't2' || a.kind === 'q')).toEqual([]);
  });

  it('after the batch ended, its record, the batch list and the report give the same count (Review)', async () => {
    p.send({ type: 'batch-end', seq: seq++, t: b.times[n - 1]! + 1, batch: b.id, reason: 'stopped' });
    await p.waitAck(seq - 1, 60_000);
    const expected = await suspectInResults();
    const d = await viewer.get(`/api/batches/${b.id}`);
    expect(d.status).toBe(200);
    expect(d.body.status).toBe('ended');
    expect(d.body.suspectCount).toBe(expected);
    expect(d.body.unjudgedCount).toBe(0);
    const list = await viewer.get('/api/batches?unit=dryer-1');
    expect(list.body.items.find((x: { id: string }) => x.id === b.id).suspectCount).toBe(expected);
    const rep = await viewer.get(`/api/batches/${b.id}/report.html`);
    expect(rep.status).toBe(200);
    expect(rep.body).toContain(`${expected} suspect scans`);
  });
});
