/**
 * The signal side installed in the real server (server/app.ts → server/signals install(ctx)):
 * outbox rows the ingest pipeline writes for a batch reach a webhook receiver, signed and in
 * order; /api/signals shows the channel's cursor; the dead-letter list is served.
 */
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { verifySignature } from '../../server/signals/webhook-signature.ts';
import { axis, login, Peer, spectrum, startTestServer, type TestServer, sqliteDb } from '../server/helpers.ts';

const SECRET = 'server-install-secret-0123456789';

async function until(cond: () => boolean, what: string, ms = 20_000): Promise<void> {
  const end = Date.now() + ms;
  while (!cond()) {
    if (Date.now() > end) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 25));
  }
}

describe('signals installed in the server', () => {
  let receiver: Server;
  let ts: TestServer;
  const got: { body: string; sig: string | undefined; id: string | undefined }[] = [];
  let down = false;
  let refused = 0;

  beforeAll(async () => {
    receiver = createServer((req, res) => {
      const chunks: Buffer[] = [];
      req.on('data', (c: Buffer) => chunks.push(c));
      req.on('end', () => {
        if (down) {
          refused++;
          return void res.writeHead(503).end();
        }
        got.push({ body: Buffer.concat(chunks).toString(), sig: req.headers['tideline-signature'] as string, id: req.headers['idempotency-key'] as string });
        res.writeHead(200).end();
      });
    });
    await new Promise<void>((r) => receiver.listen(0, '127.0.0.1', () => r()));
    const port = (receiver.address() as AddressInfo).port;
    ts = await startTestServer({ signals: { pollMs: 20, webhooks: [{ name: 'mes', url: `http://127.0.0.1:${port}/hook`, secret: SECRET, backoff: { baseMs: 20, capMs: 200 } }] } } as never);
  });

  afterAll(async () => {
    await ts?.stop();
    await new Promise<void>((r) => receiver.close(() => r()));
  });

  it('delivers the batch start and end the pipeline wrote to the outbox', async () => {
    const ax = axis(50);
    const peer = new Peer(ts.wsUrl, ts.token);
    await peer.open();
    expect((await peer.hello('nir-1', 1, ax)).type).toBe('welcome');
    const t0 = Date.now() - 3_600_000; // within the server's time window
    peer.send({ type: 'batch-start', seq: 1, t: t0, unit: 'dryer-1', batch: 'B-0001', product: 'granule A' });
    for (let k = 0; k < 5; k++) peer.sendFrame(2 + k, t0 + (k + 1) * 10_000, spectrum(50, k));
    peer.send({ type: 'batch-end', seq: 7, t: t0 + 60_000, batch: 'B-0001', reason: 'discharge' });
    await peer.waitAck(7);
    peer.close();
    await until(() => got.length >= 2, 'two webhook deliveries');
    const events = got.map((g) => JSON.parse(g.body) as { id: string; unit: string; seq: number; type: string; payload: { batch: string } });
    expect(events.map((e) => [e.unit, e.seq, e.type, e.payload.batch])).toEqual([
      ['dryer-1', 1, 'batch-start', 'B-0001'],
      ['dryer-1', 2, 'batch-end', 'B-0001'],
    ]);
    for (const g of got) {
      expect(verifySignature(SECRET, g.sig, g.body, Date.now())).toBeNull();
      expect(g.id).toBe(JSON.parse(g.body).id);
    }

    const admin = await login(ts, 'administrator');
    const status = await admin.get('/api/signals');
    expect(status.status).toBe(200);
    expect(status.body.caution).toMatch(/Tideline advises/);
    expect(status.body.channels).toHaveLength(1);
    expect(status.body.channels[0]).toMatchObject({ name: 'webhook:mes', ready: true, units: [{ unit: 'dryer-1', deliveredSeq: 2, pending: 0, retrying: null }] });
    const dead = await admin.get('/api/signals/dead-letters');
    expect(dead).toMatchObject({ status: 200, body: { items: [] } });
    const bad = await admin.get('/api/signals/dead-letters?limit=0');
    expect(bad.status).toBe(400);
    const viewer = await login(ts, 'viewer');
    expect((await viewer.post('/api/signals/dead-letters/webhook:mes/x/requeue', {})).status).toBe(403);
  });

  it('a dryer batch judged by the model while the receiver is down: every event arrives afterwards, in order, signed', async () => {
    const { buildSmallDryerModel, installModel } = await import('../server/model-fixture.ts');
    const { simulateDryerBatch } = await import('../../simulators/batch.ts');
    const { model, text } = buildSmallDryerModel();
    await installModel(ts.server.ctx.storage, text, model, 'dryer-1');
    await ts.server.ctx.ingest.refreshDeployment('dryer-1');
    got.length = 0;
    down = true;
    const batch = simulateDryerBatch({ seed: 21, id: 'B-hook', intervalS: 60 });
    const peer = new Peer(ts.wsUrl, ts.token);
    await peer.open();
    expect((await peer.hello('nir-1', 2, batch.axis)).type).toBe('welcome');
    peer.send({ type: 'batch-start', seq: 1, t: batch.start, unit: 'dryer-1', batch: 'B-hook', product: 'granule A' });
    const n = batch.spectra.length;
    for (let i = 0; i < n; i++) peer.sendFrame(2 + i, batch.times[i]!, batch.spectra[i]!);
    peer.send({ type: 'batch-end', seq: n + 2, t: batch.times[n - 1]! + 1000, batch: 'B-hook' });
    await peer.waitAck(n + 2, 60_000);
    peer.close();
    await until(() => refused >= 5, 'several refused attempts while the receiver is down');
    const admin = await login(ts, 'administrator');
    const during = await admin.get('/api/signals');
    expect(during.body.channels[0].units[0].retrying).toMatchObject({ seq: 3, lastError: expect.stringMatching(/^HTTP 503 from http:\/\/127\.0\.0\.1:\d+\/hook$/) });
    expect(during.body.channels[0].units[0].pending).toBeGreaterThan(2);
    expect(got).toHaveLength(0);

    down = false;
    const db = sqliteDb(ts.server.ctx.storage);
    const rows = db.prepare("SELECT id, unit_seq, type FROM outbox WHERE unit = 'dryer-1' AND unit_seq > 2 ORDER BY unit_seq").all() as { id: string; unit_seq: number; type: string }[];
    expect(rows.map((r) => r.type)).toContain('endpoint-state');
    await until(() => new Set(got.map((g) => g.id)).size >= rows.length, 'every event after the receiver came back');
    const firstSeen: number[] = [];
    for (const g of got) {
      expect(verifySignature(SECRET, g.sig, g.body, Date.now())).toBeNull();
      const e = JSON.parse(g.body) as { id: string; seq: number };
      expect(g.id).toBe(e.id);
      if (!firstSeen.includes(e.seq)) firstSeen.push(e.seq);
    }
    expect(firstSeen).toEqual(rows.map((r) => r.unit_seq));
    expect([...new Set(got.map((g) => g.id))].sort()).toEqual(rows.map((r) => r.id).sort());
    console.log(`webhook e2e: ${rows.length} events (${rows.map((r) => r.type).join(', ')}) after ${refused} refused attempts`);
  }, 180_000);
});
