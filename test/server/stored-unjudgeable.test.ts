/**
 * A batch an older version stored with values or times that /ingest now refuses (+Infinity from a
 * float32 overflow, t = 1e300): Review, the exports and the report still answer, naming what they
 * left out, and a restart still rebuilds the monitor of such an open batch.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { Peer, login, startTestServer, type Session, type TestServer } from './helpers.ts';
import { buildSmallDryerModel, installModel } from './model-fixture.ts';
import { simulateDryerBatch } from '../../simulators/batch.ts';
import { emptyIngestWrite } from '../../server/storage/storage.ts';

const { model, text, axis } = buildSmallDryerModel();
let ts: TestServer;
let viewer: Session;
let versionId: string;

/** Stream a simulated batch, then append what an older version stored after it: an Infinity value and t = 1e300. */
async function plant(unit: string, id: string, boot: number, end: boolean) {
  const b = simulateDryerBatch({ seed: 31, id, intervalS: 60 });
  const p = new Peer(ts.wsUrl, ts.token);
  await p.open();
  await p.hello('nir-1', boot, axis);
  const t0 = Date.now() - 5 * 3_600_000;
  let seq = 0;
  p.send({ type: 'batch-start', seq: seq++, t: t0, unit, batch: id, product: 'granule A' });
  const n = Math.min(40, b.spectra.length);
  for (let i = 0; i < n; i++) p.sendFrame(seq++, t0 + (b.times[i]! - b.start) + 1, b.spectra[i]!);
  await p.waitAck(seq - 1, 30_000);
  p.close();
  await p.waitClose();
  const row = (await ts.server.ctx.storage.getBatch(id))!;
  const w = emptyIngestWrite();
  const inf = Float32Array.from(b.spectra[n]!);
  inf[5] = Infinity;
  const lastT = t0 + (b.times[n - 1]! - b.start) + 1;
  w.spectra.push({ batch: id, idx: row.spectrumCount, seq: seq, t: lastT + 60_000, values: inf, analyzer: 'nir-1', boot, receivedAt: Date.now() });
  w.spectra.push({ batch: id, idx: row.spectrumCount + 1, seq: seq + 1, t: 1e300, values: Float32Array.from(b.spectra[n + 1]!), analyzer: 'nir-1', boot, receivedAt: Date.now() });
  w.batchProgress.push({ batch: id, spectrumCount: row.spectrumCount + 2, lastSeq: seq + 1, lastT: 1e300, endpointState: row.endpointState, endpointAt: row.endpointAt });
  if (end) w.batchEnds.push({ batch: id, endSeq: seq + 2, endT: 1e300, endReason: 'done' });
  w.boots.push({ analyzer: 'nir-1', boot, lastSeq: end ? seq + 2 : seq + 1, lastSeen: Date.now() });
  await ts.server.ctx.storage.commitIngest(w);
  return { seq: seq + (end ? 3 : 2), lastGoodT: lastT };
}

beforeAll(async () => {
  ts = await startTestServer({}, { units: ['u1', 'u2'] });
  versionId = await installModel(ts.server.ctx.storage, text, model, 'u1');
  await installModel(ts.server.ctx.storage, text, model, 'u2');
  await ts.server.ctx.ingest.refreshDeployment('u1');
  await ts.server.ctx.ingest.refreshDeployment('u2');
  viewer = await login(ts, 'viewer');
}, 120_000);
afterAll(async () => {
  await ts?.stop();
});

describe('a stored batch holding what /ingest now refuses', () => {
  it('Review, CSV and JCAMP-DX exports and the report answer 200 and name what they left out', async () => {
    await plant('u1', 'B-old', 11, true);
    const detail = await viewer.get('/api/batches/B-old');
    expect(detail.status).toBe(200);
    const cmp = await viewer.get('/api/batches/B-old/comparison');
    expect(cmp.status).toBe(200);
    expect(cmp.body.versionId).toBe(versionId);
    expect(cmp.body.leftOut).toEqual([
      { seq: 41, why: expect.stringMatching(/value 5 is Infinity/) },
      { seq: 42, why: expect.stringMatching(/1e\+300 ms is not a valid time/) },
    ]);
    const csv = await viewer.get('/api/batches/B-old/export.csv');
    expect(csv.status).toBe(200);
    const lines = (csv.body as string).trim().split('\r\n');
    expect(lines).toHaveLength(1 + 42); // header + every stored spectrum: nothing silently cut
    expect(lines[42]!.startsWith('42,1e+300,,')).toBe(true);
    const res = await viewer.get('/api/batches/B-old/export.csv?what=results');
    expect(res.status).toBe(200);
    const jdx = await viewer.get('/api/batches/B-old/export.jdx');
    expect(jdx.status).toBe(200);
    expect(jdx.body).not.toMatch(/NaN/);
    expect(jdx.body).toMatch(/##LONGDATE=\(not a valid time: 1e\+300 ms\)/);
    const rep = await viewer.get('/api/batches/B-old/report.html');
    expect(rep.status).toBe(200);
  });

  it('after a restart the open batch is judged on: the unjudgeable spectra are left out of the rebuilt monitor', async () => {
    const { seq, lastGoodT } = await plant('u2', 'B-open', 12, false);
    const resultsBefore = await ts.server.ctx.storage.resultCount('B-open');
    const dir = ts.dir;
    await ts.server.close();
    ts = await startTestServer({}, { dir, units: ['u1', 'u2'] });
    const ob = ts.server.ctx.ingest.openBatchById('B-open');
    expect(ob?.monitor).not.toBeNull();
    // the analyzer resumes: its next spectrum, stamped after the last one that could be judged, is
    // stored and judged (the stored t = 1e300 does not make it time-backwards)
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    const w = await p.hello('nir-1', 12, axis);
    expect(w.resumeAfter).toBe(seq - 1);
    const b = simulateDryerBatch({ seed: 31, id: 'x', intervalS: 60 });
    p.sendFrame(seq, lastGoodT + 3 * 60_000, b.spectra[45]!);
    await p.waitAck(seq);
    expect(p.messages.filter((m) => m.type === 'error')).toEqual([]);
    expect(resultsBefore).toBe(40);
    expect(await ts.server.ctx.storage.resultCount('B-open')).toBe(41);
    p.close();
  });
});
