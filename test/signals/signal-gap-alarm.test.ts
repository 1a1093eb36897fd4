/**
 * A hole in a unit's outbox sequence that a signal channel goes past (after waiting, as
 * docs/signals.md says) means an event for the control system may never have reached it. That is
 * raised as an alarm on the unit through the usual life cycle, not only logged: the operator sees it
 * (REST, and the alarm rows reach the receivers like any other), and acknowledges it.
 *
 * Real server with a webhook channel to a real HTTP receiver, a real analyzer client; the hole is
 * made the only way a fault can make it, by a row missing from the outbox table (here deleted while
 * the receiver was down and the rows waited).
 */
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { axis, login, Peer, sqliteDb, startTestServer, type TestServer } from '../server/helpers.ts';

const SECRET = 'signal-gap-secret-0123456789abcdef';

async function until(cond: () => boolean, what: string, ms = 30_000): Promise<void> {
  const end = Date.now() + ms;
  while (!cond()) {
    if (Date.now() > end) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 25));
  }
}

type Event = { id: string; unit: string; seq: number; type: string; payload: any };

describe('a gap in a unit outbox sequence that a channel goes past', () => {
  let receiver: Server;
  let ts: TestServer;
  const got: Event[] = [];
  let down = true;

  beforeAll(async () => {
    receiver = createServer((req, res) => {
      const chunks: Buffer[] = [];
      req.on('data', (c: Buffer) => chunks.push(c));
      req.on('end', () => {
        if (down) return void res.writeHead(503).end();
        got.push(JSON.parse(Buffer.concat(chunks).toString()) as Event);
        res.writeHead(200).end();
      });
    });
    await new Promise<void>((r) => receiver.listen(0, '127.0.0.1', () => r()));
    const port = (receiver.address() as AddressInfo).port;
    ts = await startTestServer({ signals: { pollMs: 20, webhooks: [{ name: 'mes', url: `http://127.0.0.1:${port}/hook`, secret: SECRET, backoff: { baseMs: 20, capMs: 100 } }] } } as never);
  }, 60_000);

  afterAll(async () => {
    await ts?.stop();
    await new Promise<void>((r) => receiver.close(() => r()));
  });

  it('raises a signal alarm on the unit naming the channel and the missing event; the operator acknowledges it', async () => {
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    expect((await p.hello('nir-1', 1, axis(8))).type).toBe('welcome');
    const t0 = Date.now() - 600_000;
    // two batches: outbox rows #1 start B-1, #2 end B-1, #3 start B-2, #4 end B-2
    p.send({ type: 'batch-start', seq: 0, t: t0, unit: 'dryer-1', batch: 'B-1', product: 'granule' });
    p.send({ type: 'batch-end', seq: 1, t: t0 + 1000, batch: 'B-1' });
    p.send({ type: 'batch-start', seq: 2, t: t0 + 2000, unit: 'dryer-1', batch: 'B-2', product: 'granule' });
    p.send({ type: 'batch-end', seq: 3, t: t0 + 3000, batch: 'B-2' });
    await p.waitAck(3);
    p.close();
    const db = sqliteDb(ts.server.ctx.storage);
    const rows = db.prepare("SELECT unit_seq AS seq, type FROM outbox WHERE unit = 'dryer-1' ORDER BY unit_seq").all() as { seq: number; type: string }[];
    expect(rows).toEqual([{ seq: 1, type: 'batch-start' }, { seq: 2, type: 'batch-end' }, { seq: 3, type: 'batch-start' }, { seq: 4, type: 'batch-end' }]);
    // the fault: row #2 is lost before the channel could deliver it
    expect(db.prepare("DELETE FROM outbox WHERE unit = 'dryer-1' AND unit_seq = 2").run().changes).toBe(1);
    down = false;

    // The channel delivers #1, waits at the hole, goes past it, and the alarm's own rows follow.
    await until(() => got.some((e) => e.type === 'alarm' && e.payload.alarm.state === 'cleared-unacknowledged'), 'the signal alarm delivered to the receiver');
    const seqs = got.map((e) => e.seq);
    expect(seqs.slice(0, 3)).toEqual([1, 3, 4]);
    const alarmRows = got.filter((e) => e.type === 'alarm');
    expect(alarmRows.map((e) => [e.seq, e.payload.alarm.state, e.payload.previousState])).toEqual([
      [5, 'active-unacknowledged', null],
      [6, 'cleared-unacknowledged', 'active-unacknowledged'],
    ]);

    const admin = await login(ts, 'administrator');
    const list = await admin.get('/api/alarms?unit=dryer-1');
    expect(list.status).toBe(200);
    const a = (list.body.items as any[]).find((x) => x.key === 'signal-gap:webhook:mes');
    expect(a).toMatchObject({ unit: 'dryer-1', batch: null, kind: 'signal', priority: 1, state: 'cleared-unacknowledged', active: false, value: 1 });
    expect(a.message).toMatch(/^signal channel webhook:mes found no outbox event #2 of unit dryer-1 after waiting \d+\.\d s and went on past the gap: a signal to the control system .* may have been lost/);
    // the unit summary counts it as unacknowledged
    expect((await admin.get('/api/units/dryer-1')).body).toMatchObject({ unacknowledgedAlarms: 1 });

    const operator = await login(ts, 'operator');
    const ack = await operator.post(`/api/alarms/${a.id}/acknowledge`, { comment: 'checked the MES: batch-end of B-1 entered by hand' });
    expect(ack.status).toBe(200);
    expect(ack.body).toMatchObject({ id: a.id, state: 'normal', acknowledgedBy: 'u-operator' });
    await until(() => got.some((e) => e.type === 'alarm' && e.payload.alarm.state === 'normal'), 'the acknowledgement delivered to the receiver');
    expect(got.map((e) => e.seq)).toEqual([1, 3, 4, 5, 6, 7]);
  }, 120_000);
});
