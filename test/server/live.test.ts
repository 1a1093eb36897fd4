import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch } from '../../simulators/batch.ts';
import { LivePeer, Peer, login, startTestServer, type Session, type TestServer } from './helpers.ts';
import { buildSmallDryerModel, installModel } from './model-fixture.ts';

let ts: TestServer;
let session: Session;
const batch = simulateDryerBatch({ seed: 5, id: 'sim', intervalS: 30 });

beforeAll(async () => {
  ts = await startTestServer({ live: { queueLimit: 20, highWaterBytes: 1024, unitStatusEveryMs: 20 } }, { units: ['dryer-1', 'dryer-2'] });
  const { model, text } = buildSmallDryerModel();
  await installModel(ts.server.ctx.storage, text, model, 'dryer-1');
  await installModel(ts.server.ctx.storage, text, model, 'dryer-2');
  await ts.server.ctx.ingest.refreshDeployment('dryer-1');
  await ts.server.ctx.ingest.refreshDeployment('dryer-2');
  session = await login(ts, 'viewer');
}, 120_000);
afterAll(async () => {
  await ts?.stop();
});

async function analyzer(boot: number): Promise<Peer> {
  const p = new Peer(ts.wsUrl, ts.token);
  await p.open();
  expect((await p.hello('nir-1', boot, batch.axis)).type).toBe('welcome');
  return p;
}

describe('/live', () => {
  it('refuses a browser without a session', async () => {
    const l = new LivePeer(ts.wsUrl, '');
    await expect(l.open()).rejects.toThrow(/401/);
  });

  it('bad client messages get an error naming the problem', async () => {
    const l = new LivePeer(ts.wsUrl, session.cookie);
    await l.open();
    l.ws.send('{nope');
    expect((await l.until((m) => m.type === 'error' && m.code === 'bad-json')).message).toMatch(/JSON/);
    l.send({ type: 'subscribe', id: 's', scope: { kind: 'galaxy' } });
    expect((await l.until((m) => m.type === 'error' && m.code === 'bad-message')).message).toMatch(/scope/);
    l.send({ type: 'subscribe', id: 's', scope: { kind: 'unit', unit: 'nope' } });
    expect((await l.until((m) => m.type === 'error' && m.code === 'unknown-unit')).message).toMatch(/nope/);
    l.send({ type: 'ping', t: 5 });
    expect(await l.until((m) => m.type === 'pong')).toMatchObject({ t: 5 });
    l.ws.close();
  });

  it('unit subscription: snapshot, then batch, result and unit deltas; batch subscription: snapshot with results so far', async () => {
    const l = new LivePeer(ts.wsUrl, session.cookie);
    await l.open();
    expect((await l.until((m) => m.type === 'welcome')).protocol).toBe(1);
    l.send({ type: 'subscribe', id: 'u1', scope: { kind: 'unit', unit: 'dryer-1' } });
    const snap = await l.until((m) => m.type === 'snapshot');
    expect(snap).toMatchObject({ subscription: 'u1', batch: null, results: [], units: [{ id: 'dryer-1', status: 'idle' }] });
    expect(snap.units[0].deployment.name).toBe('dryer-test');

    const p = await analyzer(1);
    p.send({ type: 'batch-start', seq: 0, t: batch.start, unit: 'dryer-1', batch: 'L-1', product: 'granule A' });
    for (let k = 1; k <= 10; k++) p.sendFrame(k, batch.times[k - 1]!, batch.spectra[k - 1]!);
    await p.waitAck(10);
    await l.until((m) => m.type === 'result' && m.result.seq === 10);
    expect(await l.until((m) => m.type === 'batch')).toMatchObject({ event: 'started', batch: { id: 'L-1', unit: 'dryer-1', status: 'open' } });
    const results = l.messages.filter((m) => m.type === 'result');
    expect(results.map((m) => m.result.seq)).toEqual([1, 2, 3, 4, 5, 6, 7, 8, 9, 10]);
    const unitMsg = await l.until((m) => m.type === 'unit' && m.unit.openBatch?.spectrumCount === 10);
    expect(unitMsg.unit).toMatchObject({ status: 'running', analyzer: 'nir-1', analyzerConnected: true, openBatch: { id: 'L-1' } });
    expect(unitMsg.unit.latest.seq).toBe(10);
    // Message counter n counts up by one per message after the welcome.
    const ns = l.messages.filter((m) => typeof m.n === 'number').map((m) => m.n);
    expect(ns).toEqual(Array.from({ length: ns.length }, (_, i) => i + 1));

    const b = new LivePeer(ts.wsUrl, session.cookie);
    await b.open();
    b.send({ type: 'subscribe', id: 'b1', scope: { kind: 'batch', batch: 'L-1' } });
    const bs = await b.until((m) => m.type === 'snapshot');
    expect(bs.results.map((r: any) => r.seq)).toEqual([1, 2, 3, 4, 5, 6, 7, 8, 9, 10]);
    expect(bs.batch).toMatchObject({ id: 'L-1', spectrumCount: 10, model: { name: 'dryer-test' } });
    for (let k = 11; k <= 13; k++) p.sendFrame(k, batch.times[k - 1]!, batch.spectra[k - 1]!);
    await b.until((m) => m.type === 'result' && m.result.seq === 13);
    expect(b.messages.filter((m) => m.type === 'result').map((m) => m.result.seq)).toEqual([11, 12, 13]);
    p.send({ type: 'batch-end', seq: 14, t: batch.times[13]!, batch: 'L-1' });
    expect(await b.until((m) => m.type === 'batch' && m.event === 'ended')).toMatchObject({ batch: { status: 'ended', spectrumCount: 13 } });
    p.close();
    l.ws.close();
    b.ws.close();
  });

  it('a slow browser does not slow ingest: its queue coalesces and gap notices cover what it missed', async () => {
    const slow = new LivePeer(ts.wsUrl, session.cookie);
    await slow.open();
    slow.send({ type: 'subscribe', id: 'slow', scope: { kind: 'unit', unit: 'dryer-2' } });
    await slow.until((m) => m.type === 'snapshot');
    // Stop reading: the server's send buffer for this client fills up.
    (slow.ws as any)._socket.pause();
    const p = await analyzer(2);
    const N = 3000;
    p.send({ type: 'batch-start', seq: 0, t: batch.start, unit: 'dryer-2', batch: 'L-slow', product: 'granule A' });
    for (let k = 1; k <= N; k++) p.sendFrame(k, batch.start + k * 1000, batch.spectra[(k - 1) % batch.spectra.length]!);
    await p.waitAck(N, 120_000);
    const dropped = Number((await ts.server.ctx.metrics.liveDropped.get()).values[0]?.value ?? 0);
    expect(dropped).toBeGreaterThan(0);
    // Resume reading: the client catches up with what remains, in order.
    (slow.ws as any)._socket.resume();
    await slow.until((m) => (m.type === 'result' && m.result.seq === N) || (m.type === 'gap' && m.toSeq === N), 60_000);
    await slow.until((m) => m.type === 'unit' && m.unit.latest?.seq === N, 30_000);
    // Every seq is covered exactly once, by a result or a gap, in order.
    const covered: number[] = [];
    for (const m of slow.messages) {
      if (m.type === 'result') covered.push(m.result.seq);
      if (m.type === 'gap') for (let s = m.fromSeq; s <= m.toSeq; s++) covered.push(s);
    }
    expect(covered).toEqual(Array.from({ length: N }, (_, i) => i + 1));
    expect(slow.messages.some((m) => m.type === 'gap')).toBe(true);
    p.close();
    slow.ws.close();
  }, 180_000);
});
