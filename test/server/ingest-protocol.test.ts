import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import WebSocket from 'ws';
import { Peer, axis, spectrum, startTestServer, type TestServer, sqliteDb } from './helpers.ts';
import { MAX_MESSAGE_BYTES, encodeSpectrumJson } from '../../core/protocol/ingest-messages.ts';
import { encodeSpectrumFrame } from '../../core/protocol/binary-frame.ts';

const AX = axis(64);
const T0 = Date.UTC(2026, 0, 5, 8, 0, 0);
let ts: TestServer;
let boot = 1000;

beforeAll(async () => {
  ts = await startTestServer({}, { units: ['dryer-1', 'dryer-2', 'dryer-3', 'dryer-4', 'dryer-5', 'dryer-6'] });
});
afterAll(async () => {
  await ts?.stop();
});

async function connected(): Promise<Peer> {
  const p = new Peer(ts.wsUrl, ts.token);
  await p.open();
  return p;
}

describe('ingest: authentication at upgrade', () => {
  it('refuses a missing token before any data is read', async () => {
    const p = new Peer(ts.wsUrl, null);
    await expect(p.open()).rejects.toThrow(/401/);
  });
  it('refuses an unknown token', async () => {
    const p = new Peer(ts.wsUrl, 'tdl_not-a-real-token');
    await expect(p.open()).rejects.toThrow(/401/);
  });
});

describe('ingest: happy path', () => {
  it('hello → welcome, batch-start, JSON and binary spectra, batch-end; all acked and stored', async () => {
    const p = await connected();
    const b = ++boot;
    const w = await p.hello('nir-1', b, AX);
    expect(w).toMatchObject({ type: 'welcome', protocol: 1, analyzer: 'nir-1', boot: b, resumeAfter: -1 });
    p.send({ type: 'batch-start', seq: 0, t: T0, unit: 'dryer-1', batch: 'B-happy', product: 'granule A' });
    p.send(encodeSpectrumJson(1, T0 + 10_000, spectrum(64, 1)));
    for (let k = 2; k <= 20; k++) p.sendFrame(k, T0 + k * 10_000, spectrum(64, k));
    p.send({ type: 'batch-end', seq: 21, t: T0 + 300_000, batch: 'B-happy', reason: 'done' });
    await p.waitAck(21);
    const batch = await ts.server.ctx.storage.getBatch('B-happy');
    expect(batch).toMatchObject({ status: 'ended', spectrumCount: 20, unit: 'dryer-1', endReason: 'done' });
    const spectra = await ts.server.ctx.storage.readSpectra('B-happy', 0, 100, 100);
    expect(spectra.map((s) => s.seq)).toEqual(Array.from({ length: 20 }, (_, i) => i + 1));
    // Raw values stored as Float32, exactly as sent.
    expect(Array.from(spectra[4]!.values)).toEqual(Array.from(Float32Array.from(spectrum(64, 5))));
    expect(p.messages.filter((m) => m.type === 'error')).toEqual([]);
    p.close();
  });

  it('a reconnect gets resumeAfter = highest persisted seq, and duplicates are acked but not stored', async () => {
    const b = ++boot;
    const p = await connected();
    await p.hello('nir-1', b, AX);
    p.send({ type: 'batch-start', seq: 0, t: T0, unit: 'dryer-2', batch: 'B-dup', product: 'granule A' });
    for (let k = 1; k <= 5; k++) p.sendFrame(k, T0 + k * 1000, spectrum(64, k));
    await p.waitAck(5);
    p.close();
    await p.waitClose();
    const q = await connected();
    const w = await q.hello('nir-1', b, AX);
    expect(w.resumeAfter).toBe(5);
    // resend 3..5 (duplicates), then 6
    for (let k = 3; k <= 6; k++) q.sendFrame(k, T0 + k * 1000, spectrum(64, k));
    await q.waitAck(6);
    const acks = q.messages.filter((m) => m.type === 'ack').map((m) => m.seq);
    expect(acks.length).toBeGreaterThanOrEqual(2);
    const rows = await ts.server.ctx.storage.readSpectra('B-dup', 0, 100, 100);
    expect(rows.map((r) => r.seq)).toEqual([1, 2, 3, 4, 5, 6]);
    q.send({ type: 'batch-end', seq: 7, t: T0 + 10_000, batch: 'B-dup' });
    await q.waitAck(7);
    q.close();
  });
});

describe('ingest: bad input names the problem; the connection and the server go on', () => {
  it('each bad message gets its error code, and good data is still accepted afterwards', async () => {
    const p = await connected();
    const b = ++boot;
    // Before hello
    p.send({ type: 'batch-start', seq: 0, t: T0, unit: 'dryer-3', batch: 'B-bad', product: 'x' });
    expect((await p.waitError('hello-required')).message).toMatch(/hello/);
    p.send('{not json');
    expect((await p.waitError('bad-json')).message).toMatch(/JSON/);
    p.send({ type: 'hello', protocol: 2, analyzer: 'nir-1', boot: b, axis: AX });
    expect((await p.waitError('unsupported-protocol')).message).toMatch(/protocol 1/);
    p.send({ type: 'hello', protocol: 1, analyzer: 'someone-else', boot: b, axis: AX });
    expect((await p.waitError('analyzer-mismatch')).message).toMatch(/someone-else/);
    p.send({ type: 'hello', protocol: 1, analyzer: 'nir-1', boot: b, axis: [1100, 1000] });
    expect((await p.waitError('bad-axis')).message).toMatch(/increase strictly.*cm⁻¹/);
    expect((await p.hello('nir-1', b, AX)).type).toBe('welcome');

    p.send({ type: 'batch-start', seq: 0, t: T0, unit: 'no-such-unit', batch: 'B-x', product: 'x' });
    expect((await p.waitError('unknown-unit')).message).toMatch(/no-such-unit/);
    // seq 0 was consumed by the refusal; spectrum without batch
    p.sendFrame(1, T0, spectrum(64, 1));
    expect((await p.waitError('no-open-batch')).seq).toBe(1);
    p.send({ type: 'batch-start', seq: 2, t: T0, unit: 'dryer-3', batch: 'B-bad', product: 'x' });
    await p.waitAck(2);
    p.sendFrame(3, T0 + 1000, spectrum(32, 1));
    expect((await p.waitError('wrong-length')).message).toMatch(/32 values.*64 points/);
    const bad = spectrum(64, 1);
    bad[7] = Number.NaN;
    p.send(JSON.stringify({ type: 'spectrum', seq: 4, t: T0 + 2000, values: bad.map((v) => (Number.isNaN(v) ? 'NaN' : v)) }));
    expect((await p.waitError('bad-message')).message).toMatch(/values\.7/);
    p.sendFrame(5, T0 + 3000, bad);
    expect((await p.waitError('non-finite')).message).toMatch(/value\[7\]/);
    p.sendFrame(6, T0 + 5000, spectrum(64, 6));
    await p.waitAck(6);
    p.sendFrame(7, T0 + 4000, spectrum(64, 7));
    expect((await p.waitError('time-backwards')).seq).toBe(7);
    p.sendFrame(10, T0 + 9000, spectrum(64, 10));
    expect((await p.waitError('seq-gap')).message).toMatch(/expected seq 8/);
    p.ws.send(new Uint8Array([1, 2, 3]));
    expect((await p.waitError('bad-frame')).message).toMatch(/shorter than/);
    const frame = encodeSpectrumFrame(8, T0 + 9000, spectrum(64, 8));
    p.ws.send(frame.subarray(0, frame.length - 4));
    expect((await p.waitError('wrong-length')).message).toMatch(/header says 64 points/);
    p.send({ type: 'batch-end', seq: 9, t: T0 + 9500, batch: 'B-other' });
    expect((await p.waitError('batch-mismatch')).message).toMatch(/B-bad/);
    p.send({ type: 'batch-start', seq: 10, t: T0 + 9500, unit: 'dryer-4', batch: 'B-bad2', product: 'x' });
    expect((await p.waitError('batch-already-open')).message).toMatch(/B-bad/);
    // The connection is still open and good data still flows.
    p.sendFrame(11, T0 + 10_000, spectrum(64, 11));
    await p.waitAck(11);
    expect(p.closed).toBeNull();
    const rows = await ts.server.ctx.storage.readSpectra('B-bad', 0, 100, 100);
    expect(rows.map((r) => r.seq)).toEqual([6, 11]);
    // Refused entries are kept for the record.
    const rej = sqliteDb(ts.server.ctx.storage).prepare('SELECT seq, code FROM rejected_entries WHERE analyzer = ? AND boot = ? ORDER BY seq').all('nir-1', b);
    expect(rej.map((r: any) => r.code)).toEqual(['unknown-unit', 'no-open-batch', 'wrong-length', 'bad-message', 'non-finite', 'time-backwards', 'wrong-length', 'batch-mismatch', 'batch-already-open']);
    p.close();
  });

  it('an axis change within one boot is refused', async () => {
    const b = ++boot;
    const p = await connected();
    await p.hello('nir-1', b, AX);
    p.close();
    await p.waitClose();
    const q = await connected();
    const r = await q.hello('nir-1', b, axis(65));
    expect(r).toMatchObject({ type: 'error', code: 'axis-mismatch' });
    q.close();
  });

  it('an oversized frame gets too-large and closes the peer (1009), and the server goes on', async () => {
    const p = await connected();
    await p.hello('nir-1', ++boot, AX);
    p.ws.send(Buffer.alloc(MAX_MESSAGE_BYTES + 1));
    const c = await p.waitClose();
    expect(c.code).toBe(1009);
    expect(p.messages.find((m) => m.type === 'error' && m.code === 'too-large')?.message).toMatch(/524289 bytes; at most 524288/);
    const q = await connected();
    expect((await q.hello('nir-1', ++boot, AX)).type).toBe('welcome');
    q.close();
  });

  it('a flood of bad messages closes the peer as abusive', async () => {
    const p = await connected();
    for (let i = 0; i < 400; i++) p.send('nonsense');
    const c = await p.waitClose();
    expect(c.code).toBe(1008);
    expect(p.messages.some((m) => m.type === 'error' && m.code === 'rate-limited')).toBe(true);
  });

  it('random binary and text garbage never crashes the server', async () => {
    const p = await connected();
    await p.hello('nir-1', ++boot, AX);
    let seed = 7;
    const rnd = () => ((seed = (seed * 1103515245 + 12345) % 2147483648) / 2147483648);
    for (let i = 0; i < 150; i++) {
      const n = Math.floor(rnd() * 200);
      const buf = Buffer.from(Array.from({ length: n }, () => Math.floor(rnd() * 256)));
      if (i % 3 === 0) buf.write('TDL1', 0);
      if (i % 2) p.ws.send(buf);
      else p.send(JSON.stringify({ type: ['spectrum', 'batch-start', 'batch-end', 'x'][i % 4], seq: i, t: rnd() > 0.5 ? -1 : 'x', values: [1] }));
    }
    await new Promise((r) => setTimeout(r, 300));
    const q = await connected();
    expect((await q.hello('nir-1', ++boot, AX)).type).toBe('welcome');
    q.close();
    p.close();
  });
});

describe('ingest: another analyzer connection replaces the first', () => {
  it('closes the older connection with 4000', async () => {
    const b = ++boot;
    const p = await connected();
    await p.hello('nir-1', b, AX);
    const q = await connected();
    await q.hello('nir-1', b, AX);
    expect((await p.waitClose()).code).toBe(4000);
    q.close();
  });
});

void WebSocket;
