/**
 * Nothing is acked that cannot be judged: a batch started on a unit whose deployed model expects
 * another axis is refused (model-mismatch) and raises a unit alarm that says so. And an analyzer
 * speaks only for itself: one with no batch on a unit can neither raise nor clear another
 * analyzer's failure alarm there.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { Peer, axis, login, spectrum, startTestServer, type Session, type TestServer, analyzerToken } from './helpers.ts';
import { buildSmallDryerModel, installModel } from './model-fixture.ts';
import { simulateDryerBatch } from '../../simulators/batch.ts';

const { model, text, axis: modelAxis } = buildSmallDryerModel();
let ts: TestServer;
let viewer: Session;
let token2: string;

beforeAll(async () => {
  ts = await startTestServer({}, { units: ['u1', 'u2'] });
  await installModel(ts.server.ctx.storage, text, model, 'u1');
  await ts.server.ctx.ingest.refreshDeployment('u1');
  token2 = await analyzerToken(ts.server.ctx.storage, 'nir-2');
  viewer = await login(ts, 'viewer');
}, 120_000);
afterAll(async () => {
  await ts?.stop();
});

const alarms = async (unit: string) => (await viewer.get(`/api/alarms?unit=${unit}`)).body.items as any[];

describe('a batch the deployed model cannot judge', () => {
  it('is refused as model-mismatch with a unit alarm naming both axes; a judged batch on the unit clears it', async () => {
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    const ax = axis(16);
    await p.hello('nir-1', 1, ax);
    const t0 = Date.now() - 3_600_000;
    p.send({ type: 'batch-start', seq: 0, t: t0, unit: 'u1', batch: 'B-wrong-axis', product: 'granule A' });
    const e = await p.waitError('model-mismatch');
    expect(e.seq).toBe(0);
    expect(e.message).toMatch(/model does not fit the analyzer: .* expects \d+ points, .*analyzer nir-1 sends 16 points, 1100–1130 nm/);
    p.sendFrame(1, t0 + 1000, spectrum(16, 1));
    await p.waitError('no-open-batch');
    await p.waitAck(1);
    expect(await ts.server.ctx.storage.getBatch('B-wrong-axis')).toBeNull();
    const a = (await alarms('u1')).find((x) => x.key === 'model-mismatch');
    expect(a).toMatchObject({ kind: 'analyzer', active: true, state: 'active-unacknowledged', priority: 1, batch: null });
    expect(a.message).toMatch(/batch B-wrong-axis cannot be judged on unit u1/);
    p.close();

    // the unit's own analyzer, with the model's axis: judged, and the alarm clears
    const q = new Peer(ts.wsUrl, token2);
    await q.open();
    await q.hello('nir-2', 1, modelAxis);
    const b = simulateDryerBatch({ seed: 5, id: 'x', intervalS: 60 });
    q.send({ type: 'batch-start', seq: 0, t: t0, unit: 'u1', batch: 'B-right-axis', product: 'granule A' });
    for (let i = 0; i < 3; i++) q.sendFrame(i + 1, t0 + (i + 1) * 60_000, b.spectra[i]!);
    q.send({ type: 'batch-end', seq: 4, t: t0 + 5 * 60_000, batch: 'B-right-axis' });
    await q.waitAck(4);
    expect(q.messages.filter((m) => m.type === 'error')).toEqual([]);
    expect(await ts.server.ctx.storage.resultCount('B-right-axis')).toBe(3);
    const cleared = (await alarms('u1')).find((x) => x.key === 'model-mismatch');
    expect(cleared?.active ?? false).toBe(false);
    q.close();
  });

  it('a unit without any deployed model still takes batches (reference batches are collected so), unjudged and without alarm', async () => {
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    await p.hello('nir-1', 2, axis(16));
    const t0 = Date.now() - 3_600_000;
    p.send({ type: 'batch-start', seq: 0, t: t0, unit: 'u2', batch: 'B-reference', product: 'granule A' });
    p.sendFrame(1, t0 + 1000, spectrum(16, 1));
    p.send({ type: 'batch-end', seq: 2, t: t0 + 2000, batch: 'B-reference' });
    await p.waitAck(2);
    expect(p.messages.filter((m) => m.type === 'error')).toEqual([]);
    expect(await ts.server.ctx.storage.getBatch('B-reference')).toMatchObject({ spectrumCount: 1, modelVersion: null });
    expect((await alarms('u2')).filter((x) => x.key === 'model-mismatch')).toEqual([]);
    p.close();
  });
});

describe('analyzer failure alarms belong to their analyzer', () => {
  it('another analyzer cannot clear or raise them on a unit where it runs no batch', async () => {
    const a = new Peer(ts.wsUrl, ts.token);
    await a.open();
    await a.hello('nir-1', 3, axis(16));
    const t0 = Date.now() - 3_600_000;
    a.send({ type: 'batch-start', seq: 0, t: t0, unit: 'u2', batch: 'B-a', product: 'granule A' });
    a.send({ type: 'analyzer-status', seq: 1, t: t0 + 1000, status: 'failure', code: 'E17', detail: 'lamp' });
    await a.waitAck(1);
    const failA = () => alarms('u2').then((l) => l.find((x) => x.key === 'analyzer-failure:nir-1'));
    expect(await failA()).toMatchObject({ active: true, state: 'active-unacknowledged' });

    const b = new Peer(ts.wsUrl, token2);
    await b.open();
    await b.hello('nir-2', 3, axis(16));
    b.send({ type: 'analyzer-status', seq: 0, t: t0 + 2000, status: 'good', unit: 'u2' });
    expect(await b.waitError('batch-mismatch')).toMatchObject({ seq: 0, message: expect.stringMatching(/runs batch B-a of analyzer nir-1; analyzer nir-2 has no batch there/) });
    b.send({ type: 'analyzer-status', seq: 1, t: t0 + 3000, status: 'failure', unit: 'u2' });
    await b.waitError('batch-mismatch');
    await b.waitAck(1);
    expect(await failA()).toMatchObject({ active: true });
    expect((await alarms('u2')).filter((x) => x.key === 'analyzer-failure:nir-2')).toEqual([]);

    // with the batch over, nir-2 may report on u2 — its own alarm, never nir-1's
    a.send({ type: 'batch-end', seq: 2, t: t0 + 4000, batch: 'B-a' });
    await a.waitAck(2);
    b.send({ type: 'analyzer-status', seq: 2, t: t0 + 5000, status: 'failure', code: 'E2', unit: 'u2' });
    await b.waitAck(2);
    b.send({ type: 'analyzer-status', seq: 3, t: t0 + 6000, status: 'good', unit: 'u2' });
    await b.waitAck(3);
    const list = await alarms('u2');
    expect(list.find((x) => x.key === 'analyzer-failure:nir-1')).toMatchObject({ active: true });
    expect(list.find((x) => x.key === 'analyzer-failure:nir-2')).toMatchObject({ active: false, state: 'cleared-unacknowledged' });
    // nir-1's own report clears its alarm
    a.send({ type: 'analyzer-status', seq: 3, t: t0 + 7000, status: 'good' });
    await a.waitAck(3);
    expect(await failA()).toMatchObject({ active: false });
    a.close();
    b.close();
  });
});
