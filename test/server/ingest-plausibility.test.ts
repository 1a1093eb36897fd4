/**
 * Values and times an analyzer sends that Tideline cannot judge are refused at the protocol boundary
 * with a named code, and the stream goes on: a value beyond float32, a time far from the server
 * clock, a hello axis that is no wavelength axis, reserved bits of a binary frame set.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { Peer, axis, spectrum, startTestServer, type TestServer } from './helpers.ts';
import { FLOAT32_MAX, axisProblem, float32Problem, timeProblem, DEFAULT_TIME_WINDOW } from '../../core/protocol/plausibility.ts';
import { encodeSpectrumFrame } from '../../core/protocol/binary-frame.ts';

const AX = axis(16);
const HOUR = 3_600_000;
const YEAR = 365.25 * 24 * HOUR;
let ts: TestServer;
let boot = 5000;

beforeAll(async () => {
  ts = await startTestServer({}, { units: ['u1', 'u2', 'u3', 'u4', 'u5', 'u6'] });
});
afterAll(async () => {
  await ts?.stop();
});

async function started(unit: string, batch: string): Promise<{ p: Peer; t0: number }> {
  const p = new Peer(ts.wsUrl, ts.token);
  await p.open();
  const w = await p.hello('nir-1', ++boot, AX);
  expect(w.type).toBe('welcome');
  const t0 = Date.now() - HOUR;
  p.send({ type: 'batch-start', seq: 0, t: t0, unit, batch, product: 'granule A' });
  await p.waitAck(0);
  return { p, t0 };
}

function noInternal(p: Peer) {
  expect(p.messages.filter((m) => m.type === 'error' && m.code === 'internal')).toEqual([]);
}

describe('core checks shared by ingest and import', () => {
  it('float32: the largest finite float32 passes, the next double beyond it does not (IEEE 754 binary32 max = (2 − 2^−23)·2^127)', () => {
    expect(FLOAT32_MAX).toBe((2 - 2 ** -23) * 2 ** 127);
    expect(float32Problem(FLOAT32_MAX)).toBeNull();
    expect(float32Problem(-FLOAT32_MAX)).toBeNull();
    expect(float32Problem(1e39)).toMatch(/beyond the float32 range/);
    expect(float32Problem(-3.5e38)).toMatch(/beyond the float32 range/);
    expect(float32Problem(Infinity)).toMatch(/not a finite number/);
    expect(float32Problem(NaN)).toMatch(/NaN/);
  });
  it('time window: ahead, behind, before 1970 and beyond a date are named with their setting', () => {
    const now = Date.UTC(2026, 5, 1);
    expect(timeProblem(now + 60_000, now, DEFAULT_TIME_WINDOW)).toBeNull();
    expect(timeProblem(now - 4 * YEAR, now, DEFAULT_TIME_WINDOW)).toBeNull();
    expect(timeProblem(now + YEAR, now, DEFAULT_TIME_WINDOW)).toMatchObject({ kind: 'ahead', message: expect.stringMatching(/ahead of the server clock.*ingest\.maxAheadMs/) });
    expect(timeProblem(now - 10 * YEAR, now, DEFAULT_TIME_WINDOW)).toMatchObject({ kind: 'behind', message: expect.stringMatching(/ingest\.maxBehindMs/) });
    expect(timeProblem(-1, now, { maxAheadMs: null, maxBehindMs: null })).toMatchObject({ kind: 'behind', message: expect.stringMatching(/before 1970/) });
    expect(timeProblem(1e300, now, { maxAheadMs: null, maxBehindMs: null })).toMatchObject({ kind: 'ahead' });
    expect(timeProblem(Infinity, now, DEFAULT_TIME_WINDOW)).toMatchObject({ kind: 'non-finite' });
  });
  it('axis: positive, strictly increasing, inside the range', () => {
    const r = { minNm: 350, maxNm: 25_000 };
    expect(axisProblem([1100, 1102], r)).toBeNull();
    expect(axisProblem([-2, 2], r)).toMatchObject({ kind: 'out-of-range', message: expect.stringMatching(/positive/) });
    expect(axisProblem([1100, 1e308], r)).toMatchObject({ kind: 'out-of-range' });
    expect(axisProblem([1100, 1100], r)).toMatchObject({ kind: 'not-increasing' });
    expect(axisProblem([9000, 4000], r)).toMatchObject({ kind: 'not-increasing', message: expect.stringMatching(/cm⁻¹/) });
  });
});

describe('ingest: values that do not fit float32', () => {
  it('a JSON value of 1e39 is refused as non-finite, consumes its seq, and the stream goes on', async () => {
    const { p, t0 } = await started('u1', 'B-f32');
    const v = spectrum(16, 1);
    v[3] = 1e39;
    p.send({ type: 'spectrum', seq: 1, t: t0 + 1000, values: v });
    const e = await p.waitError('non-finite');
    expect(e).toMatchObject({ seq: 1, message: expect.stringMatching(/values\[3\].*float32/) });
    // 1e999 in JSON text parses as Infinity: non-finite too (not bad-message)
    p.send(`{"type":"spectrum","seq":2,"t":${t0 + 2000},"values":[1e999${',0.5'.repeat(15)}]}`);
    expect(await p.waitError('non-finite')).toMatchObject({ seq: 2 });
    // a binary frame with an infinite float32
    const inf = spectrum(16, 3);
    inf[0] = Infinity;
    p.sendFrame(3, t0 + 3000, inf);
    expect(await p.waitError('non-finite')).toMatchObject({ seq: 3 });
    p.send({ type: 'spectrum', seq: 4, t: t0 + 4000, values: spectrum(16, 4) });
    p.sendFrame(5, t0 + 5000, spectrum(16, 5).map((x, i) => (i === 0 ? FLOAT32_MAX : x)));
    await p.waitAck(5);
    const rows = await ts.server.ctx.storage.readSpectra('B-f32', 0, 100, 100);
    expect(rows.map((r) => r.seq)).toEqual([4, 5]);
    for (const r of rows) for (const x of r.values) expect(Number.isFinite(x)).toBe(true);
    noInternal(p);
    p.close();
  });
});

describe('ingest: times outside the plausibility window', () => {
  it('1e300, 9e15, a year ahead, 10 years behind and before 1970 are time-implausible; the batch is never wedged', async () => {
    const { p, t0 } = await started('u2', 'B-time');
    const bad: [number, RegExp][] = [
      [1e300, /ahead of the server clock/],
      [9e15, /ahead of the server clock/],
      [Date.now() + YEAR, /ahead of the server clock.*ingest\.maxAheadMs/],
      [Date.now() - 10 * YEAR, /behind the server clock.*ingest\.maxBehindMs/],
      [-5, /before 1970/],
    ];
    let seq = 1;
    for (const [t, re] of bad) {
      p.send({ type: 'spectrum', seq, t, values: spectrum(16, seq) });
      expect(await p.waitError('time-implausible')).toMatchObject({ seq, message: expect.stringMatching(re) });
      seq++;
    }
    // the same through a binary frame and for the other entry types
    p.sendFrame(seq, 1e300, spectrum(16, seq));
    expect(await p.waitError('time-implausible')).toMatchObject({ seq });
    seq++;
    p.send({ type: 'analyzer-status', seq, t: 9e15, status: 'good' });
    expect(await p.waitError('time-implausible')).toMatchObject({ seq });
    seq++;
    const tInf = new Uint8Array(encodeSpectrumFrame(seq, 0, spectrum(16, 0)));
    new DataView(tInf.buffer).setFloat64(16, Infinity, true);
    p.ws.send(tInf);
    expect(await p.waitError('non-finite')).toMatchObject({ seq });
    seq++;
    // correctly stamped spectra after all of them are stored: none is time-backwards
    const first = seq;
    for (let k = 0; k < 5; k++) p.sendFrame(seq++, t0 + 10_000 * (k + 1), spectrum(16, k));
    p.send({ type: 'batch-end', seq: seq++, t: t0 + 60_000, batch: 'B-time' });
    await p.waitAck(seq - 1);
    const rows = await ts.server.ctx.storage.readSpectra('B-time', 0, 1000, 100);
    expect(rows.map((r) => r.seq)).toEqual([first, first + 1, first + 2, first + 3, first + 4]);
    expect(await ts.server.ctx.storage.getBatch('B-time')).toMatchObject({ status: 'ended' });
    expect(p.messages.filter((m) => m.type === 'error' && m.code === 'time-backwards')).toEqual([]);
    noInternal(p);
    p.close();
  });

  it('a batch-start stamped far ahead is refused, so its batch never opens with an impossible start', async () => {
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    await p.hello('nir-1', ++boot, AX);
    p.send({ type: 'batch-start', seq: 0, t: 1e300, unit: 'u3', batch: 'B-far', product: 'granule A' });
    expect(await p.waitError('time-implausible')).toMatchObject({ seq: 0 });
    const t0 = Date.now() - 1000;
    p.send({ type: 'batch-start', seq: 1, t: t0, unit: 'u3', batch: 'B-near', product: 'granule A' });
    p.sendFrame(2, t0 + 500, spectrum(16, 2));
    await p.waitAck(2);
    expect(await ts.server.ctx.storage.getBatch('B-far')).toBeNull();
    expect(await ts.server.ctx.storage.getBatch('B-near')).toMatchObject({ spectrumCount: 1 });
    noInternal(p);
    p.close();
  });
});

describe('ingest: the time window is a setting', () => {
  it('ingest.maxAheadMs widens the window: with 3 h a spectrum 2 h ahead passes and one 4 h ahead does not', async () => {
    const wide = await startTestServer({ ingest: { maxAheadMs: 3 * HOUR } }, { units: ['w1'] });
    try {
      const p = new Peer(wide.wsUrl, wide.token);
      await p.open();
      await p.hello('nir-1', 1, AX);
      const t0 = Date.now();
      p.send({ type: 'batch-start', seq: 0, t: t0, unit: 'w1', batch: 'B-wide', product: 'p' });
      p.sendFrame(1, t0 + 2 * HOUR, spectrum(16, 1));
      p.sendFrame(2, t0 + 4 * HOUR, spectrum(16, 2));
      await p.waitError('time-implausible');
      await p.waitAck(2);
      expect((await wide.server.ctx.storage.readSpectra('B-wide', 0, 10, 10)).map((r) => r.seq)).toEqual([1]);
      p.close();
    } finally {
      await wide.stop();
    }
  });
});

describe('ingest: hello axis', () => {
  it('negative nm, 1e308 nm, a repeated point and a descending axis are refused as bad-axis; no stream opens', async () => {
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    const cases: [number[], RegExp][] = [
      [[-1100, -1000], /positive/],
      [[1100, 1e308], /350 to 25000 nm/],
      [[1100, 1102, 1102, 1104], /increase strictly/],
      [[9000, 8000], /cm⁻¹/],
      [[100, 200], /350 to 25000 nm/],
    ];
    for (const [ax, re] of cases) {
      const r = await p.hello('nir-1', ++boot, ax);
      expect(r).toMatchObject({ type: 'error', code: 'bad-axis', message: expect.stringMatching(re) });
    }
    p.send({ type: 'batch-start', seq: 0, t: Date.now(), unit: 'u4', batch: 'B-noaxis', product: 'p' });
    await p.waitError('hello-required');
    const ok = await p.hello('nir-1', ++boot, AX);
    expect(ok.type).toBe('welcome');
    p.close();
  });
});

describe('ingest: reserved fields of the binary frame', () => {
  it('non-zero flags or reserved bytes are refused as bad-frame naming the bytes; the seq is consumed', async () => {
    const { p, t0 } = await started('u5', 'B-reserved');
    const f1 = new Uint8Array(encodeSpectrumFrame(1, t0 + 1000, spectrum(16, 1)));
    new DataView(f1.buffer).setUint16(6, 1, true);
    p.ws.send(f1);
    expect(await p.waitError('bad-frame')).toMatchObject({ seq: 1, message: expect.stringMatching(/bytes 6–7.*reserved/) });
    const f2 = new Uint8Array(encodeSpectrumFrame(2, t0 + 2000, spectrum(16, 2)));
    new DataView(f2.buffer).setUint32(28, 0xdead, true);
    p.ws.send(f2);
    expect(await p.waitError('bad-frame')).toMatchObject({ seq: 2, message: expect.stringMatching(/bytes 28–31.*reserved/) });
    p.sendFrame(3, t0 + 3000, spectrum(16, 3));
    await p.waitAck(3);
    expect((await ts.server.ctx.storage.readSpectra('B-reserved', 0, 10, 10)).map((r) => r.seq)).toEqual([3]);
    p.close();
  });
});
