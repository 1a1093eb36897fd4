/**
 * Connections and access on /ingest and /live, as a site's analyzer, a browser and a hostile client
 * would meet them: a revoked token ends its open connection, a largest legal JSON spectrum fits and
 * an oversized message gets an error frame, the message rate holds within any second, a takeover by
 * a newer connection refuses nothing already stored, and /live refuses a foreign Origin.
 */
import { readFileSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import WebSocket from 'ws';
import { loadConfig } from '../../server/config.ts';
import { LivePeer, Peer, analyzerToken, axis, login, spectrum, startTestServer, type TestServer, sqliteDb } from './helpers.ts';
import { MAX_MESSAGE_BYTES, MAX_SPECTRUM_POINTS } from '../../core/protocol/ingest-messages.ts';

let ts: TestServer;

beforeAll(async () => {
  ts = await startTestServer({ ingest: { heartbeatMs: 300, maxMessagesPerSecond: 500, maxErrorsPer10s: 100_000 } }, { units: ['u1', 'u2', 'u3', 'u4', 'u5'] });
});
afterAll(async () => {
  await ts?.stop();
});

describe('analyzer token revocation', () => {
  it('closes the connection that authenticated with it, with token-revoked; nothing is acked after', async () => {
    const admin = await login(ts, 'administrator');
    const made = await admin.post('/api/auth/tokens', { analyzer: 'nir-rev', label: 'test' });
    expect(made.status).toBe(201);
    const p = new Peer(ts.wsUrl, made.body.token);
    await p.open();
    await p.hello('nir-rev', 1, axis(16));
    const t0 = Date.now() - 60_000;
    p.send({ type: 'batch-start', seq: 0, t: t0, unit: 'u1', batch: 'B-rev', product: 'p' });
    p.sendFrame(1, t0 + 1000, spectrum(16, 1));
    await p.waitAck(1);
    const del = await fetch(ts.server.url + `/api/auth/tokens/${made.body.id}`, { method: 'DELETE', headers: { cookie: admin.cookie, 'x-csrf-token': admin.csrf } });
    expect(del.status).toBeLessThan(300);
    const e = await p.waitError('token-revoked');
    expect(e.message).toMatch(/revoked/);
    expect((await p.waitClose()).code).toBe(4401);
    expect((await ts.server.ctx.storage.readSpectra('B-rev', 0, 10, 10)).map((r) => r.seq)).toEqual([1]);
    // and a new connection with it is refused at the upgrade
    await expect(new Peer(ts.wsUrl, made.body.token).open()).rejects.toThrow(/401/);
  });
});

describe('analyzer token revocation through REST, with a heartbeat far away', () => {
  it('closes the open connection before the revocation is answered: nothing sent after the 204 is taken', async () => {
    // A heartbeat of an hour: the heartbeat's token re-check cannot be what closes the connection.
    const slow = await startTestServer({ ingest: { heartbeatMs: 3_600_000 } }, { units: ['u9'] });
    try {
      const admin = await login(slow, 'administrator');
      const made = await admin.post('/api/auth/tokens', { analyzer: 'nir-now', label: 'test' });
      expect(made.status).toBe(201);
      const p = new Peer(slow.wsUrl, made.body.token);
      await p.open();
      expect((await p.hello('nir-now', 1, axis(16))).type).toBe('welcome');
      const t0 = Date.now() - 60_000;
      p.send({ type: 'batch-start', seq: 0, t: t0, unit: 'u9', batch: 'B-now', product: 'p' });
      p.sendFrame(1, t0 + 1000, spectrum(16, 1));
      await p.waitAck(1);
      const del = await fetch(slow.server.url + `/api/auth/tokens/${made.body.id}`, { method: 'DELETE', headers: { cookie: admin.cookie, 'x-csrf-token': admin.csrf } });
      expect(del.status).toBe(204);
      p.sendFrame(2, t0 + 2000, spectrum(16, 2));
      const e = await p.waitError('token-revoked');
      expect(e.message).toMatch(/analyzer token of this connection was revoked/);
      const c = await p.waitClose();
      expect(c).toEqual({ code: 4401, reason: 'analyzer token revoked' });
      expect(Math.max(...p.messages.filter((m) => m.type === 'ack').map((m) => m.seq as number))).toBe(1);
      // what was acked before stays stored; the spectrum sent after the revocation was not taken
      await slow.server.ctx.ingest.flush();
      expect((await slow.server.ctx.storage.readSpectra('B-now', 0, 10, 10)).map((r) => r.seq)).toEqual([1]);
    } finally {
      await slow.stop();
    }
  });
});

describe('message size', () => {
  it(`a ${MAX_SPECTRUM_POINTS}-point JSON spectrum with the longest float32 numbers is taken`, async () => {
    const n = MAX_SPECTRUM_POINTS;
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    const ax = Array.from({ length: n }, (_, i) => 1000 + i * 0.1);
    expect((await p.hello('nir-1', 11, ax)).type).toBe('welcome');
    const t0 = Date.now() - 60_000;
    p.send({ type: 'batch-start', seq: 0, t: t0, unit: 'u2', batch: 'B-big', product: 'p' });
    const v = Array.from({ length: n }, (_, i) => -1.1754943508222875e-38 * (1 + (i % 7) / 1e7));
    const text = JSON.stringify({ type: 'spectrum', seq: 1, t: t0 + 1000, values: v });
    expect(text.length).toBeGreaterThan(256 * 1024);
    expect(text.length).toBeLessThanOrEqual(MAX_MESSAGE_BYTES);
    p.send(text);
    await p.waitAck(1);
    expect(p.messages.filter((m) => m.type === 'error')).toEqual([]);
    // beyond the limit: a too-large error frame naming it, then close 1009
    p.send('{"type":"spectrum","seq":2,"t":1,"values":[' + '0,'.repeat(MAX_MESSAGE_BYTES / 2) + '0]}');
    const e = await p.waitError('too-large');
    expect(e.message).toMatch(/at most 524288 bytes/);
    expect((await p.waitClose()).code).toBe(1009);
  });
});

describe('message rate', () => {
  it('a burst above maxMessagesPerSecond within one second is refused with rate-limited', async () => {
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    await p.hello('nir-1', 12, axis(4));
    // 2 × the rate sent at once: a bucket that allowed a 2-second burst would take them all
    for (let i = 0; i < 1000; i++) p.send({ type: 'nothing', i });
    const e = await p.waitError('rate-limited');
    expect(e.message).toMatch(/more than 500 messages per second/);
    expect((await p.waitClose()).code).toBe(1008);
  });
});

describe('takeover by a newer connection of the same analyzer', () => {
  it('refuses nothing that is stored: the old connection stops, the new one resends, every spectrum stored once', async () => {
    const old = new Peer(ts.wsUrl, ts.token);
    await old.open();
    await old.hello('nir-1', 13, axis(8));
    const t0 = Date.now() - 600_000;
    old.send({ type: 'batch-start', seq: 0, t: t0, unit: 'u3', batch: 'B-take', product: 'p' });
    for (let k = 1; k <= 200; k++) old.sendFrame(k, t0 + k * 1000, spectrum(8, k));
    // the new connection says hello while the old one is still sending
    const neu = new Peer(ts.wsUrl, ts.token);
    await neu.open();
    const w = await neu.hello('nir-1', 13, axis(8));
    expect(w.type).toBe('welcome');
    for (let k = w.resumeAfter + 1; k <= 300; k++) neu.sendFrame(k, t0 + k * 1000, spectrum(8, k));
    neu.send({ type: 'batch-end', seq: 301, t: t0 + 301_000, batch: 'B-take' });
    await neu.waitAck(301);
    expect(neu.messages.filter((m) => m.type === 'error')).toEqual([]);
    const rows = await ts.server.ctx.storage.readSpectra('B-take', 0, 1000, 1000);
    expect(rows.map((r) => r.seq)).toEqual(Array.from({ length: 300 }, (_, i) => i + 1));
    const rejected = sqliteDb(ts.server.ctx.storage).prepare('SELECT COUNT(*) AS n FROM rejected_entries WHERE analyzer = ? AND boot = ?').get('nir-1', 13) as { n: number };
    expect(rejected.n).toBe(0);
  });
});

describe('message rate of a streaming analyzer', () => {
  it('the documented default is the one the server runs with: 20,000 messages within any second', () => {
    expect(loadConfig({ overrides: { dataDir: '/nonexistent' } }).ingest.maxMessagesPerSecond).toBe(20_000);
    const doc = readFileSync(new URL('../../docs/protocol.md', import.meta.url), 'utf8');
    expect(doc).toMatch(/at most 20,000 messages within any second\s+per connection \(`ingest\.maxMessagesPerSecond`/);
  });

  it('a burst of real spectra above the limit: rate-limited and closed (1008); every acked spectrum stored once, the rest resent; another analyzer never notices', async () => {
    // Driven by count: the limit here is 500 messages within any second; after hello and batch-start
    // the analyzer sends 750 spectra in one burst, which the server reads within far less than a
    // second, so the limit is met inside the burst whatever the machine's speed.
    const L = 500;
    const N = 750;
    const tokenB = await analyzerToken(ts.server.ctx.storage, 'nir-calm');
    const b = new Peer(ts.wsUrl, tokenB);
    await b.open();
    await b.hello('nir-calm', 1, axis(16));
    const t0 = Date.now() - 3_600_000;
    b.send({ type: 'batch-start', seq: 0, t: t0, unit: 'u5', batch: 'B-calm', product: 'p' });
    for (let k = 1; k <= 20; k++) b.sendFrame(k, t0 + k * 1000, spectrum(16, k));
    await b.waitAck(20);

    const a = new Peer(ts.wsUrl, ts.token);
    await a.open();
    expect((await a.hello('nir-1', 14, axis(16))).type).toBe('welcome');
    a.send({ type: 'batch-start', seq: 0, t: t0, unit: 'u4', batch: 'B-fast', product: 'p' });
    await a.waitAck(0);
    for (let k = 1; k <= N; k++) a.sendFrame(k, t0 + k * 1000, spectrum(16, k));
    for (let k = 21; k <= 40; k++) b.sendFrame(k, t0 + k * 1000, spectrum(16, k));
    const e = await a.waitError('rate-limited');
    expect(e.message).toBe(`more than ${L} messages per second`);
    expect(e.seq).toBeUndefined();
    const c = await a.waitClose();
    expect(c.code).toBe(1008);
    expect(c.reason).toBe(`more than ${L} messages per second`);
    const ackedBefore = Math.max(-1, ...a.messages.filter((m) => m.type === 'ack').map((m) => m.seq as number));

    // Nothing acked is lost: the new connection resumes after what is stored, which covers every ack.
    const a2 = new Peer(ts.wsUrl, ts.token);
    await a2.open();
    const w = await a2.hello('nir-1', 14, axis(16));
    expect(w.type).toBe('welcome');
    const r = w.resumeAfter as number;
    expect(r).toBeGreaterThanOrEqual(ackedBefore);
    // the limit cut the burst: every spectrum before the first one over it was taken (L − 2 of them
    // when hello and batch-start are still in the window, up to L when they are not), none after
    expect(r).toBeGreaterThanOrEqual(L - 2);
    expect(r).toBeLessThanOrEqual(L);
    expect((await ts.server.ctx.storage.readSpectra('B-fast', 0, 1e15, 10_000)).map((x) => x.seq)).toEqual(Array.from({ length: r }, (_, i) => i + 1));
    for (let k = r + 1; k <= N; k++) a2.sendFrame(k, t0 + k * 1000, spectrum(16, k));
    a2.send({ type: 'batch-end', seq: N + 1, t: t0 + (N + 1) * 1000, batch: 'B-fast' });
    await a2.waitAck(N + 1);
    expect(a2.messages.filter((m) => m.type === 'error')).toEqual([]);
    expect((await ts.server.ctx.storage.readSpectra('B-fast', 0, 1e15, 10_000)).map((x) => x.seq)).toEqual(Array.from({ length: N }, (_, i) => i + 1));
    expect(sqliteDb(ts.server.ctx.storage).prepare('SELECT COUNT(*) AS n FROM rejected_entries WHERE analyzer = ? AND boot = ?').get('nir-1', 14)).toEqual({ n: 0 });

    // the other analyzer went on throughout
    await b.waitAck(40);
    for (let k = 41; k <= 60; k++) b.sendFrame(k, t0 + k * 1000, spectrum(16, k));
    await b.waitAck(60);
    expect(b.closed).toBeNull();
    expect(b.messages.filter((m) => m.type === 'error')).toEqual([]);
    expect((await ts.server.ctx.storage.readSpectra('B-calm', 0, 1e15, 1000)).map((x) => x.seq)).toEqual(Array.from({ length: 60 }, (_, i) => i + 1));
    a2.close();
    b.close();
  }, 60_000);
});

describe('/live and the Origin header', () => {
  it('refuses a page of another site carrying the session cookie; the server own origin is taken', async () => {
    const viewer = await login(ts, 'viewer');
    const foreign = new WebSocket(ts.wsUrl + '/live', { headers: { cookie: viewer.cookie, origin: 'https://evil.example' } });
    const status = await new Promise<number>((resolve) => {
      foreign.on('unexpected-response', (_q, r) => resolve(r.statusCode ?? 0));
      foreign.on('open', () => resolve(101));
      foreign.on('error', () => undefined);
    });
    expect(status).toBe(403);
    const own = new LivePeer(ts.wsUrl, viewer.cookie);
    await own.open();
    own.ws.close();
    const same = new WebSocket(ts.wsUrl + '/live', { headers: { cookie: viewer.cookie, origin: ts.server.url } });
    await new Promise<void>((resolve, reject) => {
      same.on('open', () => resolve());
      same.on('unexpected-response', (_q, r) => reject(new Error(`refused ${r.statusCode}`)));
    });
    same.close();
  });
});
