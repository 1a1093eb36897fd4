/**
 * The audit trail's anchor leaves the server at a set interval (signals.auditAnchorEveryMs): to a
 * webhook receiver (signed), to an MQTT broker (retained, so a later subscriber finds it) and to the
 * OPC UA variable Tideline/AuditAnchor; a record added later moves the anchor on. What a receiver
 * kept shows a trail cut back at its end with its head rewritten — which the chain alone cannot.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import mqtt from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ChainedAuditTrail } from '../../server/audit/audit-trail.ts';
import { SqliteStorage } from '../../server/storage/sqlite-storage.ts';
import { verifySignature } from '../../server/signals/webhook-signature.ts';
import { login, startTestServer, type TestServer } from '../server/helpers.ts';
import { mosquittoPath, startMosquitto, type Broker } from './helpers/mosquitto.ts';
import { connectClient, type TestClient } from './helpers/opcua-client.ts';

const SECRET = 'anchor-webhook-secret-0123456789';
const ANCHOR_RE = /^(\d+):([0-9a-f]{64})$/;

async function until<T>(get: () => T | undefined | null | false, what: string, ms = 30_000): Promise<T> {
  const end = Date.now() + ms;
  for (;;) {
    const v = get();
    if (v) return v;
    if (Date.now() > end) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 25));
  }
}

describe.skipIf(!mosquittoPath)('the audit anchor through the signal channels', () => {
  let receiver: Server;
  let broker: Broker;
  let ts: TestServer;
  let ua: TestClient;
  const hooks: { body: string; sig: string | undefined }[] = [];
  const dir = mkdtempSync(join(tmpdir(), 'tideline-anchor-'));

  beforeAll(async () => {
    receiver = createServer((req, res) => {
      const chunks: Buffer[] = [];
      req.on('data', (c: Buffer) => chunks.push(c));
      req.on('end', () => {
        hooks.push({ body: Buffer.concat(chunks).toString(), sig: req.headers['tideline-signature'] as string });
        res.writeHead(200).end();
      });
    });
    await new Promise<void>((r) => receiver.listen(0, '127.0.0.1', () => r()));
    broker = await startMosquitto();
    ts = await startTestServer({
      signals: {
        pollMs: 20,
        auditAnchorEveryMs: 300,
        webhooks: [{ name: 'historian', url: `http://127.0.0.1:${(receiver.address() as AddressInfo).port}/hook`, secret: SECRET }],
        mqtt: { url: broker.url, prefix: 'site-a', clientId: 'tideline-anchor-test' },
        opcua: { port: 0, securityModes: ['None'], allowAnonymous: true },
      },
    } as never, { dir });
    const admin = await login(ts, 'administrator');
    const st = await admin.get('/api/signals');
    ua = await connectClient(st.body.opcua.endpointUrl);
  }, 120_000);

  afterAll(async () => {
    await ua?.close();
    await ts?.stop();
    broker?.stop();
    await new Promise<void>((r) => receiver?.close(() => r()));
    rmSync(dir, { recursive: true, force: true });
  });

  it('sends the chain head to every channel, and the next record moves it on', async () => {
    const audit = ts.server.ctx.audit!;
    const head = async () => {
      const a = (await audit.anchor())!;
      return `${a.seq}:${a.hash}`;
    };
    const first = await head();

    // webhook: the envelope's shape with unit and seq null, signed like every delivery
    const hook = await until(() => hooks.find((h) => JSON.parse(h.body).payload?.anchor === first), `a webhook anchor ${first}`);
    const body = JSON.parse(hook.body);
    expect(body).toMatchObject({ type: 'audit-anchor', unit: null, seq: null, payload: { anchor: first } });
    expect(body.payload.anchor).toMatch(ANCHOR_RE);
    expect(verifySignature(SECRET, hook.sig, hook.body, Date.now())).toBeNull();

    // OPC UA: Tideline/AuditAnchor
    let uaValue = '';
    for (let i = 0; i < 600 && uaValue !== first; i++) {
      uaValue = String((await ua.read('/Objects/1:Tideline/1:AuditAnchor')).value.value);
      if (uaValue !== first) await new Promise((r) => setTimeout(r, 50));
    }
    expect(uaValue).toBe(first);

    // an audited action (a unit created over REST) moves the head; the next anchor carries it
    const admin = await login(ts, 'administrator');
    expect((await admin.post('/api/units', { id: 'dryer-7', kind: 'dryer', name: 'Dryer 7' })).status).toBe(201);
    const second = await head();
    expect(second).not.toBe(first);
    await until(() => hooks.some((h) => JSON.parse(h.body).payload?.anchor === second), `a webhook anchor ${second}`);

    // MQTT: retained, so a subscriber that comes now still gets the latest one
    const sub = mqtt.connect(broker.url, { clientId: 'anchor-late-subscriber' });
    const got: string[] = [];
    sub.on('message', (_t, p) => got.push(JSON.parse(p.toString()).anchor));
    await new Promise<void>((r) => sub.on('connect', () => sub.subscribe('site-a/v1/audit/anchor', { qos: 1 }, () => r())));
    await until(() => got.includes(second), `the retained MQTT anchor ${second}`);
    sub.end(true);

    // what the receivers kept shows a trail cut back with its head rewritten
    const file = join(dir, 'tideline.db');
    await ua.close();
    ua = undefined as never;
    await ts.stop();
    const storage = new SqliteStorage({ file, checkpointInWorker: false });
    const db = storage.db;
    const trail = new ChainedAuditTrail(storage);
    expect(await trail.verify([{ seq: Number(second.split(':')[0]), hash: second.split(':')[1]! }])).toMatchObject({ ok: true });
    db.exec('DROP TRIGGER audit_trail_no_delete');
    const last = Number(second.split(':')[0]);
    db.prepare('DELETE FROM audit_trail WHERE seq = ?').run(last);
    const prev = db.prepare('SELECT seq, hash FROM audit_trail ORDER BY seq DESC LIMIT 1').get() as { seq: number; hash: string };
    db.prepare('UPDATE audit_head SET seq = ?, hash = ?').run(prev.seq, prev.hash);
    expect(await trail.verify()).toMatchObject({ ok: true }); // the chain alone cannot tell
    const v = await trail.verify([{ seq: last, hash: second.split(':')[1]! }]);
    expect(v).toMatchObject({ ok: false, brokenSeq: last });
    await storage.close();
    ts = undefined as never;
  }, 120_000);
});
