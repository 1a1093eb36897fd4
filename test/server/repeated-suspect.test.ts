/**
 * Repeated suspect scans raise an alarm through the public paths. A dryer batch from the simulator
 * with its 'spikes' fault (single-scan scatter spikes from a clump) is streamed over /ingest: each
 * spike is a suspect scan (beyond a limit, too short-lived to raise a T² or Q alarm), and 3 of
 * them within the last 20 judged spectra (the default; common practice, no source) raise one
 * 'repeated-suspect' analyzer alarm for the batch — on REST, on /live and on the outbox the
 * webhook, MQTT and OPC UA channels deliver. When the spikes stop and the window holds fewer than
 * 3 again the condition clears and the alarm stays to be acknowledged (ISA-18.2
 * cleared-unacknowledged). A good batch raises none. The spectrum that raised the alarm is checked
 * against the per-spectrum results the same server serves, with the 3-in-20 rule counted here.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch } from '../../simulators/batch.ts';
import { buildSmallDryerModel, installModel } from './model-fixture.ts';
import { LivePeer, Peer, login, sqliteDb, startTestServer, type Session, type TestServer } from './helpers.ts';

let ts: TestServer;
let viewer: Session;
let live: LivePeer;
let p: Peer;
let seq = 0;
const good = simulateDryerBatch({ seed: 31, id: 'good-1', intervalS: 60 });
const spiky = simulateDryerBatch({ seed: 32, id: 'spiky-2', intervalS: 60, faults: [{ type: 'spikes', onsetS: 300, params: { probability: 0.35, magnitude: 0.3 } }] });
// the same batch without the fault: its spectra after the spikes stop
const clean = simulateDryerBatch({ seed: 32, id: 'spiky-2', intervalS: 60 });
const SPIKY_UNTIL = 25;
const N = Math.min(60, spiky.spectra.length, good.spectra.length);
const seqOf = new Map<number, number>();

async function stream(id: string, spectra: (i: number) => ArrayLike<number>, times: number[], start: number) {
  p.send({ type: 'batch-start', seq: seq++, t: start, unit: 'dryer-1', batch: id, product: 'granule A' });
  for (let i = 0; i < N; i++) {
    if (id === spiky.id) seqOf.set(seq, i);
    p.sendFrame(seq++, times[i]!, Float32Array.from(spectra(i)));
  }
  await p.waitAck(seq - 1, 120_000);
}

beforeAll(async () => {
  ts = await startTestServer({}, { units: ['dryer-1'] });
  viewer = await login(ts, 'viewer');
  const { model, text } = buildSmallDryerModel(11);
  await installModel(ts.server.ctx.storage, text, model, 'dryer-1');
  await ts.server.ctx.ingest.refreshDeployment('dryer-1');
  live = new LivePeer(ts.wsUrl, viewer.cookie);
  await live.open();
  live.send({ type: 'subscribe', id: 'u', scope: { kind: 'unit', unit: 'dryer-1' } });
  await live.until((m) => m.type === 'snapshot');
  p = new Peer(ts.wsUrl, ts.token);
  await p.open();
  await p.hello('nir-1', 1, good.axis);
  await stream(good.id, (i) => good.spectra[i]!, good.times, good.start);
  p.send({ type: 'batch-end', seq: seq++, t: good.times[N - 1]! + 1, batch: good.id, reason: 'stopped' });
  // spikes for the first SPIKY_UNTIL spectra, then the same batch without them
  await stream(spiky.id, (i) => (i < SPIKY_UNTIL ? spiky.spectra[i]! : clean.spectra[i]!), spiky.times, spiky.start);
}, 300_000);

afterAll(async () => {
  live?.ws.close();
  p?.close();
  await ts?.stop();
});

async function alarmsOf(batch: string): Promise<any[]> {
  const r = await viewer.get(`/api/alarms?batch=${batch}&limit=100`);
  expect(r.status).toBe(200);
  return r.body.items as any[];
}

async function suspectFlags(batch: string): Promise<{ seq: number; suspect: boolean }[]> {
  const r = await viewer.get(`/api/batches/${batch}/results?fromSeq=0&toSeq=100000&limit=10000`);
  expect(r.status).toBe(200);
  return r.body.items as { seq: number; suspect: boolean }[];
}

/** The seqs at which "3 suspect in the last 20 spectra" turns on and off, counted here. */
function episodes(flags: { seq: number; suspect: boolean }[]): { on: number; off: number | null }[] {
  const out: { on: number; off: number | null }[] = [];
  for (let i = 0; i < flags.length; i++) {
    const n = flags.slice(Math.max(0, i - 19), i + 1).filter((f) => f.suspect).length;
    const open = out.length > 0 && out[out.length - 1]!.off === null;
    if (n >= 3 && !open) out.push({ on: flags[i]!.seq, off: null });
    else if (n < 3 && open) out[out.length - 1]!.off = flags[i]!.seq;
  }
  return out;
}

describe('repeated suspect scans raise one analyzer alarm per episode', () => {
  it('a good batch raises none', async () => {
    const flags = await suspectFlags(good.id);
    expect(flags.length).toBe(N);
    expect(episodes(flags)).toEqual([]);
    expect((await alarmsOf(good.id)).filter((a) => a.key === 'repeated-suspect')).toEqual([]);
  });

  it('a batch with spike scans raises it on REST, /live and the outbox, and it stays to be acknowledged after it clears', async () => {
    const flags = await suspectFlags(spiky.id);
    expect(flags.filter((f) => f.suspect).length).toBeGreaterThanOrEqual(5);
    const ep = episodes(flags);
    expect(ep.length).toBeGreaterThanOrEqual(1);
    const alarms = await alarmsOf(spiky.id);
    const mine = alarms.filter((a) => a.key === 'repeated-suspect');
    expect(mine.length, JSON.stringify(alarms.map((a) => [a.key, a.state]))).toBe(1);
    const a = mine[0]!;
    expect(a).toMatchObject({ kind: 'analyzer', batch: spiky.id, unit: 'dryer-1', priority: 3 });
    expect(a.message).toMatch(/^repeated suspect scans over: [0-2] of the last 20 spectra suspect/);
    // the raising spectrum is the one where the count first reached 3 in 20
    expect(seqOf.get(a.seq)).toBeGreaterThanOrEqual(SPIKY_UNTIL);
    expect(a.raisedSpectrumT).toBe(spiky.times[seqOf.get(ep[0]!.on)!]);
    // the last episode ended after the spikes stopped; cleared, not acknowledged (ISA-18.2)
    const last = ep[ep.length - 1]!;
    expect(last.off).not.toBeNull();
    expect(a.seq).toBe(last.off);
    expect(a).toMatchObject({ active: false, state: 'cleared-unacknowledged' });
    // /live carried it while it stood
    const msg = await live.until((m) => JSON.stringify(m).includes('"key":"repeated-suspect"') && JSON.stringify(m).includes('"active":true'));
    expect(JSON.stringify(msg)).toContain(spiky.id);
    // the outbox (webhook, MQTT, OPC UA): raise and clear as alarm rows of the batch
    const rows = sqliteDb(ts.server.ctx.storage)
      .prepare(`SELECT payload FROM outbox WHERE unit = 'dryer-1' AND type = 'alarm'`)
      .all() as { payload: string }[];
    const out = rows.map((r) => JSON.parse(r.payload).alarm).filter((x: any) => x.key === 'repeated-suspect');
    expect(out.every((x: any) => x.id === a.id && x.batch === spiky.id && x.kind === 'analyzer')).toBe(true);
    expect(out.filter((x: any) => x.active).length).toBe(ep.length);
    expect(out[out.length - 1]).toMatchObject({ active: false, state: 'cleared-unacknowledged' });
    // acknowledged, it returns to normal
    const operator = await login(ts, 'operator');
    const r = await operator.post(`/api/alarms/${a.id}/acknowledge`, { comment: 'probe window cleaned' });
    expect(r.status).toBe(200);
    expect(r.body).toMatchObject({ state: 'normal', acknowledgedBy: 'u-operator' });
  });
});
