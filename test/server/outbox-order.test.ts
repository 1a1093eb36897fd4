/**
 * Outbox rows of a unit are numbered from one counter and must be committed in that order: an
 * operator's acknowledge (or shelve, or the stale-data alarm) used to commit its row at once while
 * rows numbered before it still waited for the group commit, so a dispatcher delivered 1, 3, moved
 * its cursor to 3 and never sent 2. Here the group commit is held back (a long window), an alarm is
 * acknowledged through REST while a batch-start row waits, and a webhook receiver must get every
 * row of the unit, each once, in order (docs/signals.md: never lost, in order per unit).
 */
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { axis, login, Peer, startTestServer, type TestServer, sqliteDb } from './helpers.ts';

let receiver: Server;
let ts: TestServer;
const got: { unit: string; seq: number; type: string }[] = [];

async function until(cond: () => boolean, what: string, ms = 20_000): Promise<void> {
  const end = Date.now() + ms;
  while (!cond()) {
    if (Date.now() > end) throw new Error(`timed out waiting for ${what}; got ${JSON.stringify(got)}`);
    await new Promise((r) => setTimeout(r, 20));
  }
}

beforeAll(async () => {
  receiver = createServer((req, res) => {
    const chunks: Buffer[] = [];
    req.on('data', (c: Buffer) => chunks.push(c));
    req.on('end', () => {
      const e = JSON.parse(Buffer.concat(chunks).toString()) as { unit: string; seq: number; type: string };
      got.push({ unit: e.unit, seq: e.seq, type: e.type });
      res.writeHead(200).end();
    });
  });
  await new Promise<void>((r) => receiver.listen(0, '127.0.0.1', () => r()));
  const port = (receiver.address() as AddressInfo).port;
  ts = await startTestServer({ signals: { pollMs: 10, webhooks: [{ name: 'mes', url: `http://127.0.0.1:${port}/hook`, secret: 'outbox-order-secret-0123456789ab' }] } } as never);
});

afterAll(async () => {
  await ts?.stop();
  await new Promise<void>((r) => receiver.close(() => r()));
});

describe('outbox rows of a unit', () => {
  it('an acknowledge while data rows wait for the group commit: every row delivered, in order, none skipped', async () => {
    const admin = await login(ts, 'operator');
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    await p.hello('nir-1', 1, axis(16));
    const t0 = Date.now() - 600_000;
    // row 1: the analyzer's failure alarm (committed and acked)
    p.send({ type: 'analyzer-status', seq: 0, t: t0, status: 'failure', code: 'lamp', unit: 'dryer-1' });
    await p.waitAck(0);
    const before = () => sqliteDb(ts.server.ctx.storage).prepare('SELECT COUNT(*) AS n FROM outbox').get() as { n: number };
    const n0 = before().n; // the status change and the failure alarm
    expect(n0).toBeGreaterThanOrEqual(2);
    await until(() => got.length === n0, 'the rows so far delivered');
    const alarms = (await admin.get('/api/alarms?unit=dryer-1')).body as { items?: { id: string; state: string }[] } | { id: string; state: string }[];
    const list = Array.isArray(alarms) ? alarms : (alarms.items ?? []);
    const failure = list.find((a) => a.state === 'active-unacknowledged');
    expect(failure).toBeDefined();

    // From now on the group commit waits long: the batch-start's row (2) stays pending …
    ts.server.ctx.config.ingest.groupCommitMs = 60_000;
    p.send({ type: 'batch-start', seq: 1, t: t0 + 1000, unit: 'dryer-1', batch: 'B-order', product: 'granule A' });
    await until(() => ts.server.ctx.ingest.openByUnit.has('dryer-1'), 'the batch-start taken (not yet committed)');
    expect(p.messages.some((m) => m.type === 'ack' && m.seq === 1)).toBe(false);
    // … while the operator acknowledges: its row (3) may not be committed ahead of row 2.
    const ack = await admin.post(`/api/alarms/${failure!.id}/acknowledge`, { comment: 'lamp replaced soon' });
    expect(ack.status).toBe(200);
    ts.server.ctx.config.ingest.groupCommitMs = 2;
    await p.waitAck(1);
    const stored = (sqliteDb(ts.server.ctx.storage).prepare('SELECT unit_seq, type FROM outbox WHERE unit = ? ORDER BY unit_seq').all('dryer-1') as { unit_seq: number; type: string }[]).map((r) => [r.unit_seq, r.type]);
    expect(stored.map(([seq]) => seq)).toEqual(Array.from({ length: stored.length }, (_, i) => i + 1));
    expect(stored.slice(n0)).toEqual([
      [n0 + 1, 'batch-start'],
      [n0 + 2, 'alarm'],
    ]);
    await until(() => got.length >= stored.length, 'every row delivered');
    expect(got.map((g) => [g.seq, g.type])).toEqual(stored);
    p.close();
  });
});
