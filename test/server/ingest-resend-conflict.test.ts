/**
 * A seq names one entry: a resend with the same (analyzer, boot, seq) but other content is refused
 * as a conflict — never acked as a duplicate — whether the first one is still pending or already
 * committed, and after a restart. An unchanged resend is acked again as before.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { Peer, axis, spectrum, startTestServer, type TestServer } from './helpers.ts';
import { encodeSpectrumFrame } from '../../core/protocol/binary-frame.ts';

const AX = axis(16);
let ts: TestServer;

beforeAll(async () => {
  ts = await startTestServer({}, { units: ['u1', 'u2'] });
});
afterAll(async () => {
  await ts?.stop();
});

describe('resend of a seq already taken', () => {
  it('with other values, t, batch fields or status is a conflict; unchanged it is acked; nothing stored changes', async () => {
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    await p.hello('nir-1', 1, AX);
    const t0 = Date.now() - 3_600_000;
    p.send({ type: 'batch-start', seq: 0, t: t0, unit: 'u1', batch: 'B-c', product: 'granule A' });
    p.sendFrame(1, t0 + 1000, spectrum(16, 1));
    // resent at once, while the first may still wait for its commit: other values
    const other = spectrum(16, 1);
    other[7] += 0.25;
    p.sendFrame(1, t0 + 1000, other);
    const c1 = await p.waitError('conflict');
    expect(c1).toMatchObject({ seq: 1, message: expect.stringMatching(/values\[7\] is .*, stored /) });
    p.send({ type: 'analyzer-status', seq: 2, t: t0 + 1500, status: 'good' });
    p.send({ type: 'batch-end', seq: 3, t: t0 + 2000, batch: 'B-c', reason: 'done' });
    await p.waitAck(3);
    // committed now: each kind of difference
    const cases: [unknown, RegExp][] = [
      [{ type: 'batch-start', seq: 0, t: t0, unit: 'u1', batch: 'B-c', product: 'granule B' }, /product is "granule B", stored "granule A"/],
      [{ type: 'batch-start', seq: 0, t: t0 + 1, unit: 'u1', batch: 'B-c', product: 'granule A' }, /t is .*stored/],
      [{ type: 'spectrum', seq: 1, t: t0 + 1000, values: other }, /values\[7\]/],
      [{ type: 'analyzer-status', seq: 2, t: t0 + 1500, status: 'failure' }, /status is failure, stored good/],
      [{ type: 'batch-end', seq: 3, t: t0 + 2000, batch: 'B-c', reason: 'aborted' }, /reason is "aborted", stored "done"/],
      [{ type: 'batch-end', seq: 1, t: t0 + 1000, batch: 'B-c' }, /a batch-end where a spectrum is stored/],
    ];
    for (const [m, re] of cases) {
      p.send(m);
      expect(await p.waitError('conflict')).toMatchObject({ message: expect.stringMatching(re) });
    }
    // unchanged resends (JSON and binary) are acked again
    const acksBefore = p.messages.filter((m) => m.type === 'ack').length;
    p.send({ type: 'batch-start', seq: 0, t: t0, unit: 'u1', batch: 'B-c', product: 'granule A' });
    p.ws.send(encodeSpectrumFrame(1, t0 + 1000, spectrum(16, 1)));
    p.send({ type: 'spectrum', seq: 1, t: t0 + 1000, values: spectrum(16, 1) });
    p.send({ type: 'batch-end', seq: 3, t: t0 + 2000, batch: 'B-c', reason: 'done' });
    await p.waitFor(() => p.messages.filter((m) => m.type === 'ack').length >= acksBefore + 4);
    expect(p.messages.filter((m) => m.type === 'error').length).toBe(1 + cases.length);
    const rows = await ts.server.ctx.storage.readSpectra('B-c', 0, 100, 100);
    expect(rows).toHaveLength(1);
    expect(Array.from(rows[0]!.values)).toEqual(Array.from(Float32Array.from(spectrum(16, 1))));
    expect(await ts.server.ctx.storage.getBatch('B-c')).toMatchObject({ product: 'granule A', endReason: 'done' });
    p.close();
  });

  it('is a conflict after a restart too (the stored entry is the reference)', async () => {
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    await p.hello('nir-1', 2, AX);
    const t0 = Date.now() - 3_600_000;
    p.send({ type: 'batch-start', seq: 0, t: t0, unit: 'u2', batch: 'B-r', product: 'granule A' });
    p.sendFrame(1, t0 + 1000, spectrum(16, 1));
    await p.waitAck(1);
    p.close();
    await p.waitClose();
    const dir = ts.dir;
    await ts.server.close();
    ts = await startTestServer({}, { dir, units: ['u1', 'u2'] });
    const q = new Peer(ts.wsUrl, ts.token);
    await q.open();
    expect((await q.hello('nir-1', 2, AX)).resumeAfter).toBe(1);
    q.sendFrame(1, t0 + 1000, spectrum(16, 9));
    expect(await q.waitError('conflict')).toMatchObject({ seq: 1 });
    q.sendFrame(1, t0 + 1000, spectrum(16, 1));
    await q.waitAck(1);
    q.sendFrame(2, t0 + 2000, spectrum(16, 2));
    await q.waitAck(2);
    expect((await ts.server.ctx.storage.readSpectra('B-r', 0, 10, 10)).map((r) => r.seq)).toEqual([1, 2]);
    q.close();
  });
});
