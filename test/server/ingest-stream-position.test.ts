/**
 * The stream position of an (analyzer, boot) moves only when an entry with a valid seq (an integer
 * 0 … 2^53 − 1) is stored or refused; an invalid seq is refused without touching it and is never
 * stored as a position; a stored invalid position (left by an earlier version) is repaired at start.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { encodeSpectrumFrame } from '../../core/protocol/binary-frame.ts';
import { Peer, axis, capturingLogger, spectrum, startTestServer, type TestServer, sqliteDb } from './helpers.ts';

const AX = axis(32);
const T0 = Date.now() - 3_600_000;
let ts: TestServer;
let boot = 500;

beforeAll(async () => {
  ts = await startTestServer({}, { units: ['dryer-1', 'dryer-2', 'dryer-3', 'dryer-4', 'dryer-5'] });
});
afterAll(async () => {
  await ts?.stop();
});

async function peer(t: TestServer = ts): Promise<Peer> {
  const p = new Peer(t.wsUrl, t.token);
  await p.open();
  return p;
}

/** A whole small batch from `from` on; resolves when the batch-end is acked. */
async function batchFrom(p: Peer, from: number, unit: string, id: string) {
  p.send({ type: 'batch-start', seq: from, t: T0, unit, batch: id, product: 'granule A' });
  for (let k = 1; k <= 3; k++) p.sendFrame(from + k, T0 + k * 1000, spectrum(32, k));
  p.send({ type: 'batch-end', seq: from + 4, t: T0 + 5000, batch: id });
  await p.waitAck(from + 4);
}

describe('an invalid seq never moves the stream position', () => {
  for (const [what, seq, unit] of [
    ['a fraction (1.5)', 1.5, 'dryer-1'],
    ['1e300', 1e300, 'dryer-2'],
    ['2^53, beyond the largest exact integer', 2 ** 53, 'dryer-3'],
  ] as const) {
    it(`first entry after a connect with ${what} is refused, names no seq, and entries from 0 on are stored`, async () => {
      const p = await peer();
      const b = ++boot;
      expect((await p.hello('nir-1', b, AX)).resumeAfter).toBe(-1);
      p.send({ type: 'spectrum', seq, t: T0, values: spectrum(32, 0) });
      const e = await p.waitError('bad-message');
      expect(e.message).toMatch(/^seq: /);
      expect(e.seq).toBeUndefined();
      await batchFrom(p, 0, unit, `B-pos-${b}`);
      const rows = await ts.server.ctx.storage.readSpectra(`B-pos-${b}`, 0, 100, 100);
      expect(rows.map((r) => r.seq)).toEqual([1, 2, 3]);
      expect((await ts.server.ctx.storage.getAnalyzerBoot('nir-1', b))!.lastSeq).toBe(4);
      p.close();
      await p.waitClose();
      // and a reconnect resumes after the stored entries, not after the invalid seq
      const q = await peer();
      expect((await q.hello('nir-1', b, AX)).resumeAfter).toBe(4);
      q.close();
    });
  }

  it('a binary frame with an invalid seq is refused without a seq and moves nothing', async () => {
    const p = await peer();
    const b = ++boot;
    await p.hello('nir-1', b, AX);
    p.ws.send(encodeSpectrumFrame(2.5, T0, spectrum(32, 0)));
    const e = await p.waitError('bad-frame');
    expect(e.seq).toBeUndefined();
    await batchFrom(p, 0, 'dryer-4', `B-pos-${b}`);
    expect((await ts.server.ctx.storage.readSpectra(`B-pos-${b}`, 0, 100, 100)).map((r) => r.seq)).toEqual([1, 2, 3]);
    p.close();
  });

  it('a message of an unknown type consumes no seq', async () => {
    const p = await peer();
    const b = ++boot;
    await p.hello('nir-1', b, AX);
    p.send({ type: 'batch-start', seq: 0, t: T0, unit: 'dryer-5', batch: `B-pos-${b}`, product: 'granule A' });
    await p.waitAck(0);
    p.send({ type: 'calibration', seq: 1, t: T0 + 500 });
    const e = await p.waitError('bad-message');
    expect(e.message).toMatch(/unknown message type "calibration"/);
    expect(e.seq).toBeUndefined();
    p.sendFrame(1, T0 + 1000, spectrum(32, 1));
    await p.waitAck(1);
    expect((await ts.server.ctx.storage.readSpectra(`B-pos-${b}`, 0, 100, 100)).map((r) => r.seq)).toEqual([1]);
    const rejected = sqliteDb(ts.server.ctx.storage).prepare('SELECT COUNT(*) AS n FROM rejected_entries WHERE analyzer = ? AND boot = ?').get('nir-1', b) as { n: number };
    expect(rejected.n).toBe(0);
    p.send({ type: 'batch-end', seq: 2, t: T0 + 2000, batch: `B-pos-${b}` });
    await p.waitAck(2);
    p.close();
  });
});

describe('a stored invalid stream position is repaired at start', () => {
  const dir = mkdtempSync(join(tmpdir(), 'tideline-position-'));
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  it('resumes after the highest stored seq and says so in the log', async () => {
    let s = await startTestServer({}, { dir, units: ['dryer-1'] });
    let p = await peer(s);
    await p.hello('nir-1', 77, AX);
    await batchFrom(p, 0, 'dryer-1', 'B-repair');
    p.close();
    await p.waitClose();
    await s.stop();
    // What an earlier version could leave behind: a refused entry's seq adopted as the position.
    const { default: Database } = await import('better-sqlite3');
    const db = new Database(join(dir, 'tideline.db'));
    db.prepare('UPDATE analyzer_boots SET last_seq = ? WHERE analyzer = ? AND boot = ?').run(1e300, 'nir-1', 77);
    db.prepare('INSERT INTO rejected_entries (analyzer, boot, seq, code, message, received_at) VALUES (?, ?, ?, ?, ?, ?)').run('nir-1', 77, 1e300, 'bad-message', 'seq: invalid', 0);
    db.close();

    const log = capturingLogger();
    s = await startTestServer({}, { dir, units: ['dryer-1'], log });
    try {
      const said = log.lines.filter((l) => l.level === 'warn' && /stream position/.test(l.text));
      expect(said).toHaveLength(1);
      expect(said[0]!.text).toMatch(/analyzer nir-1 boot 77: the stored stream position 1e\+300 is not a valid seq/);
      expect(said[0]!.text).toMatch(/repaired to 4, the highest seq stored for it, so the analyzer resends from 5/);
      expect(said[0]!.text).toMatch(/1 refused-entry record/);
      p = await peer(s);
      expect((await p.hello('nir-1', 77, AX)).resumeAfter).toBe(4);
      p.send({ type: 'batch-start', seq: 5, t: T0 + 10_000, unit: 'dryer-1', batch: 'B-repair-2', product: 'granule A' });
      await p.waitAck(5);
      expect((await s.server.ctx.storage.getBatch('B-repair-2'))?.startSeq).toBe(5);
      p.close();
    } finally {
      await s.stop();
    }
  });
});
