/** Alarm handling per ANSI/ISA-18.2-2016: chattering counted and shown; shelving limited to one shift. */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateReferenceSet } from '../../simulators/batch.ts';
import { Peer, login, startTestServer, type Session, type TestServer } from './helpers.ts';

let ts: TestServer;
let viewer: Session;
const [b] = simulateReferenceSet('dryer', 1, 5, { intervalS: 60 });
beforeAll(async () => {
  ts = await startTestServer({ ingest: { staleAfterMs: 300 } }, { units: ['dryer-1'] });
  viewer = await login(ts, 'viewer');
}, 120_000);
afterAll(async () => {
  await ts?.stop();
});

async function staleAlarm(active: boolean): Promise<any> {
  for (let i = 0; i < 200; i++) {
    const a = (await viewer.get('/api/alarms?batch=chatter-1')).body.items.find((x: any) => x.kind === 'stale');
    if (a && a.active === active) return a;
    await new Promise((r) => setTimeout(r, 25));
  }
  throw new Error(`no stale alarm with active=${active}`);
}

describe('alarm chattering and shelving limits', () => {
  it('three activations within a minute mark the alarm as chattering; the first two do not', async () => {
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    await p.hello('nir-1', 9, b!.axis);
    p.send({ type: 'batch-start', seq: 0, t: b!.start, unit: 'dryer-1', batch: 'chatter-1', product: 'granule A' });
    let seq = 1;
    const counts: { n: number; chattering: boolean }[] = [];
    for (let k = 0; k < 3; k++) {
      p.sendFrame(seq, b!.times[k]!, b!.spectra[k]!);
      await p.waitAck(seq++);
      const a = await staleAlarm(true); // silence → stale
      counts.push({ n: a.recentActivations, chattering: a.chattering });
    }
    expect(counts).toEqual([
      { n: 1, chattering: false },
      { n: 2, chattering: false },
      { n: 3, chattering: true },
    ]);
    const a = await staleAlarm(true);
    const operator = await login(ts, 'operator');
    let r = await operator.post(`/api/alarms/${a.id}/shelve`, { minutes: 481, reason: 'too long' });
    expect(r.status).toBe(400);
    expect(r.body.errors[0].message).toMatch(/at most 480 minutes/);
    r = await operator.post(`/api/alarms/${a.id}/shelve`, { minutes: 480, reason: 'chattering stale alarm while the analyzer is serviced' });
    expect(r.status).toBe(200);
    p.close();
  }, 120_000);
});
