/**
 * Webhook delivery from the outbox: receiver down, then up — every event arrives, in per-unit
 * sequence order, with a signature that an independent HMAC-SHA256 (Python's hmac module)
 * verifies; a receiver that keeps failing puts the event in the dead-letter list.
 */
import { execFileSync } from 'node:child_process';
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { afterEach, describe, expect, it } from 'vitest';
import { backoffDelay } from '../../server/signals/backoff.ts';
import { SignalDispatcher } from '../../server/signals/dispatcher.ts';
import { SqliteSignalRepository } from '../../server/storage/sqlite-signals.ts';
import { WebhookChannel } from '../../server/signals/webhook-channel.ts';
import { hmacSha256Hex, verifySignature } from '../../server/signals/webhook-signature.ts';
import { appendOutbox, openSignalDb } from './helpers/outbox-db.ts';

const SECRET = 'test-secret-0123456789abcdef';
const T0 = Date.UTC(2031, 4, 6, 8, 0, 0);

interface Received {
  headers: Record<string, string | string[] | undefined>;
  body: string;
}

function listen(server: Server, port = 0): Promise<number> {
  return new Promise((resolve, reject) => {
    server.once('error', reject);
    server.listen(port, '127.0.0.1', () => resolve((server.address() as AddressInfo).port));
  });
}

function receiver(received: Received[], status: () => number): Server {
  return createServer((req, res) => {
    const chunks: Buffer[] = [];
    req.on('data', (c: Buffer) => chunks.push(c));
    req.on('end', () => {
      const code = status();
      if (code === 200) received.push({ headers: req.headers, body: Buffer.concat(chunks).toString('utf8') });
      res.writeHead(code).end();
    });
  });
}

const cleanups: (() => Promise<void> | void)[] = [];
afterEach(async () => {
  for (const c of cleanups.splice(0).reverse()) await c();
});

async function until(cond: () => boolean | Promise<boolean>, what: string, ms = 20_000): Promise<void> {
  const end = Date.now() + ms;
  while (!(await cond())) {
    if (Date.now() > end) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 20));
  }
}

describe('HMAC-SHA256', () => {
  it('matches RFC 4231 test case 2', () => {
    // RFC 4231 §4.3: key "Jefe", data "what do ya want for nothing?"
    expect(hmacSha256Hex('Jefe', 'what do ya want for nothing?')).toBe('5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843');
  });
  it('refuses a changed body, a wrong secret and an old timestamp', () => {
    const body = '{"a":1}';
    const h = `t=${T0},v1=${hmacSha256Hex(SECRET, `${T0}.${body}`)}`;
    expect(verifySignature(SECRET, h, body, T0)).toBeNull();
    expect(verifySignature(SECRET, h, '{"a":2}', T0)).toMatch(/does not match/);
    expect(verifySignature('another-secret-0123456789', h, body, T0)).toMatch(/does not match/);
    expect(verifySignature(SECRET, h, body, T0 + 3600_000)).toMatch(/away from now/);
    expect(verifySignature(SECRET, undefined, body, T0)).toMatch(/no signature/);
  });
});

describe('backoff', () => {
  it('doubles up to the cap with up to half of it random', () => {
    const p = { baseMs: 100, capMs: 1000 };
    expect([1, 2, 3, 4, 5, 6].map((a) => backoffDelay(a, p, () => 0))).toEqual([50, 100, 200, 400, 500, 500]);
    expect([1, 2, 3, 4, 5, 6].map((a) => backoffDelay(a, p, () => 0.999999))).toEqual([100, 200, 400, 800, 1000, 1000]);
    expect(() => backoffDelay(0, p)).toThrow(/attempts/);
  });
});

describe('webhook channel', () => {
  it('delivers every event after the receiver was down, in order per unit, signed', async () => {
    const db = openSignalDb();
    cleanups.push(() => { db.close(); });
    const store = new SqliteSignalRepository(db);
    // find a free port, then leave it closed: the receiver is down (connection refused)
    const received: Received[] = [];
    let server = receiver(received, () => 200);
    const port = await listen(server);
    await new Promise<void>((r) => server.close(() => r()));

    const failures: string[] = [];
    const channel = new WebhookChannel({
      name: 'historian',
      url: `http://127.0.0.1:${port}/tideline`,
      secret: SECRET,
      maxAttempts: 1000,
      backoff: { baseMs: 20, capMs: 200 },
      timeoutMs: 2000,
    });
    const dispatcher = new SignalDispatcher(store, channel, { pollMs: 20, onError: (_c, _e, err) => failures.push(err.message) });
    cleanups.push(() => dispatcher.stop());
    dispatcher.start();

    const written: { id: string; seq: number; unit: string }[] = [];
    const units = ['dryer-1', 'dryer-2'];
    for (let i = 0; i < 15; i++) {
      for (const unit of units) {
        const r = appendOutbox(db, unit, i % 5 === 4 ? 'endpoint-state' : 'condition', { i, unit, note: 'ü' }, T0 + i * 10_000);
        written.push({ ...r, unit });
      }
      dispatcher.wake();
      if (i === 5) await until(() => failures.length >= 6, 'several failed attempts while the receiver is down');
    }
    expect(received).toHaveLength(0);
    const attempts = db.prepare('SELECT COUNT(*) AS n FROM signal_attempt').get() as { n: number };
    expect(attempts.n).toBe(2); // one blocked head per unit

    // receiver comes up on the same port
    server = receiver(received, () => 200);
    await listen(server, port);
    cleanups.push(() => new Promise<void>((r) => server.close(() => r())));
    await until(() => new Set(received.map((r) => r.headers['tideline-event-id'])).size === written.length, 'all events');

    const bodies = received.map((r) => JSON.parse(r.body) as { id: string; unit: string; seq: number; payload: { i: number } });
    // every id arrived; duplicates only with the same id and body
    const byId = new Map<string, string>();
    for (const r of received) {
      const id = r.headers['tideline-event-id'] as string;
      expect(r.headers['idempotency-key']).toBe(id);
      if (byId.has(id)) expect(r.body).toBe(byId.get(id));
      byId.set(id, r.body);
    }
    expect([...byId.keys()].sort()).toEqual(written.map((w) => w.id).sort());
    // order by sequence per unit
    for (const unit of units) {
      const seqs = bodies.filter((b) => b.unit === unit).map((b) => b.seq);
      expect(seqs).toEqual(Array.from({ length: 15 }, (_, k) => k + 1));
    }
    // independent signature check: Python's hmac over "<t>.<body>"
    const script = `
import hmac, hashlib, json, sys
items = json.load(sys.stdin)
bad = 0
for it in items:
    parts = dict(p.split('=', 1) for p in it['sig'].split(','))
    mac = hmac.new(${JSON.stringify(SECRET)}.encode(), (parts['t'] + '.' + it['body']).encode('utf-8'), hashlib.sha256).hexdigest()
    bad += 0 if hmac.compare_digest(mac, parts['v1']) else 1
print(bad, len(items))
`;
    const out = execFileSync('python3', ['-c', script], { input: JSON.stringify(received.map((r) => ({ sig: r.headers['tideline-signature'], body: r.body }))) }).toString().trim();
    expect(out).toBe(`0 ${received.length}`);
    // the cursor moves once the 2xx answer is back
    await until(async () => (await store.cursor('webhook:historian', 'dryer-1')) === 15 && (await store.cursor('webhook:historian', 'dryer-2')) === 15, 'cursors at the end');
    expect(db.prepare('SELECT COUNT(*) AS n FROM signal_attempt').get()).toEqual({ n: 0 });
  });

  it('dead-letters an event after maxAttempts and goes on with the next', async () => {
    const db = openSignalDb();
    cleanups.push(() => { db.close(); });
    const store = new SqliteSignalRepository(db);
    const received: Received[] = [];
    let failFirst = true;
    const server = createServer((req, res) => {
      const chunks: Buffer[] = [];
      req.on('data', (c: Buffer) => chunks.push(c));
      req.on('end', () => {
        const body = JSON.parse(Buffer.concat(chunks).toString()) as { seq: number };
        if (body.seq === 1 && failFirst) return res.writeHead(500).end();
        received.push({ headers: req.headers, body: JSON.stringify(body) });
        res.writeHead(204).end();
      });
    });
    const port = await listen(server);
    cleanups.push(() => new Promise<void>((r) => server.close(() => r())));
    const a = appendOutbox(db, 'reactor-1', 'endpoint-state', { to: 'done' }, T0);
    const b = appendOutbox(db, 'reactor-1', 'endpoint-state', { to: 'signalled' }, T0 + 1);
    const channel = new WebhookChannel({ name: 'mes', url: `http://127.0.0.1:${port}/`, secret: SECRET, maxAttempts: 3, backoff: { baseMs: 5, capMs: 20 }, timeoutMs: 2000 });
    const dispatcher = new SignalDispatcher(store, channel, { pollMs: 10 });
    cleanups.push(() => dispatcher.stop());
    dispatcher.start();
    await until(() => received.length === 1, 'the second event');
    const dead = await store.deadLetters({ channel: 'webhook:mes' });
    expect(dead).toHaveLength(1);
    expect(dead[0]).toMatchObject({ event_id: a.id, unit: 'reactor-1', unit_seq: 1, attempts: 3, last_error: expect.stringMatching(/HTTP 500/) });
    expect(JSON.parse(received[0]!.body).id).toBe(b.id);
    // requeue once the receiver is fixed
    failFirst = false;
    expect(await store.requeue('webhook:mes', a.id, Date.now())).toBe(true);
    await until(() => received.length === 2, 'the requeued event');
    // marked once the 2xx answer is back
    await until(async () => (await store.deadLetter('webhook:mes', a.id))!.delivered_at !== null, 'the dead letter marked delivered');
    expect(await store.requeued('webhook:mes')).toEqual([]);
  });

  it('a channel added to a server with history starts at the end; once registered it resumes, never skips', async () => {
    const db = openSignalDb();
    cleanups.push(() => {
      db.close();
    });
    const store = new SqliteSignalRepository(db);
    for (let i = 0; i < 3; i++) appendOutbox(db, 'dryer-1', 'endpoint-state', { old: i }, T0 + i);
    const received: Received[] = [];
    let up = true;
    const server = receiver(received, () => (up ? 200 : 503));
    const port = await listen(server);
    cleanups.push(() => new Promise<void>((r) => server.close(() => r())));
    const make = () =>
      new SignalDispatcher(store, new WebhookChannel({ name: 'late', url: `http://127.0.0.1:${port}/`, secret: SECRET, maxAttempts: 1000, backoff: { baseMs: 5, capMs: 20 }, timeoutMs: 2000 }), { pollMs: 10, startAtEnd: true });
    let d = make();
    d.start();
    const fresh = appendOutbox(db, 'dryer-1', 'endpoint-state', { new: 1 }, T0 + 10);
    d.wake();
    await until(() => received.length === 1, 'the new event');
    expect(JSON.parse(received[0]!.body).id).toBe(fresh.id);
    // stopped while events wait (receiver down): the next start resumes with them
    up = false;
    const waiting = [appendOutbox(db, 'dryer-1', 'alarm', { w: 1 }, T0 + 11), appendOutbox(db, 'dryer-2', 'alarm', { w: 2 }, T0 + 12)];
    d.wake();
    await until(() => store.attempt('webhook:late', waiting[0]!.id) !== undefined, 'a failed attempt');
    await d.stop();
    up = true;
    d = make();
    cleanups.push(() => d.stop());
    d.start();
    await until(() => received.length === 3, 'the waiting events after the restart');
    expect(received.slice(1).map((r) => JSON.parse(r.body).id).sort()).toEqual(waiting.map((w) => w.id).sort());
  });
});
