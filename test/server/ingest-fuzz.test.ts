/**
 * Fuzzing the ingest protocol (seeded, so a failure replays): the frame and message parsers never
 * throw anything but a protocol error and never pass an entry that cannot be judged; and a real
 * server fed thousands of hostile messages keeps the connection, never answers `internal`, loses
 * nothing it acked, stores only what can be judged, and takes a clean batch afterwards.
 * Longer runs: npm run fuzz -- --minutes N.
 */
import fc from 'fast-check';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { decodeSpectrumFrame, encodeSpectrumFrame } from '../../core/protocol/binary-frame.ts';
import { IngestProtocolError, isValidSeq, parseAnalyzerText } from '../../core/protocol/ingest-messages.ts';
import { fuzzRound } from '../../scripts/fuzz-ingest.ts';
import { startTestServer, type TestServer } from './helpers.ts';

/** What every decoded entry must be: a valid seq, a finite t, finite float32 values. */
function judgeable(e: ReturnType<typeof parseAnalyzerText>) {
  if (e.type === 'hello') return;
  expect(isValidSeq(e.seq)).toBe(true);
  expect(Number.isFinite(e.t)).toBe(true);
  if (e.type === 'spectrum') for (const v of e.values) expect(Number.isFinite(v)).toBe(true);
}

function decodeOrRefuse<T>(f: () => T): T | null {
  try {
    return f();
  } catch (e) {
    expect(e).toBeInstanceOf(IngestProtocolError);
    return null;
  }
}

describe('parsers under fuzzing (fast-check, seeded)', () => {
  it('binary frames: random bytes, and valid frames with random bytes overwritten', () => {
    fc.assert(
      fc.property(fc.uint8Array({ minLength: 0, maxLength: 200 }), (bytes) => {
        const e = decodeOrRefuse(() => decodeSpectrumFrame(bytes));
        if (e) judgeable(e);
      }),
      { seed: 20261205, numRuns: 3000 },
    );
    fc.assert(
      fc.property(
        fc.nat({ max: 2 ** 40 }),
        fc.double({ noNaN: false }),
        fc.array(fc.float(), { minLength: 2, maxLength: 12 }),
        fc.array(fc.tuple(fc.nat(), fc.integer({ min: 0, max: 255 })), { maxLength: 4 }),
        (seq, t, values, edits) => {
          const f = new Uint8Array(encodeSpectrumFrame(seq, t, values));
          for (const [at, b] of edits) f[at % f.length] = b;
          const e = decodeOrRefuse(() => decodeSpectrumFrame(f));
          if (e) judgeable(e);
        },
      ),
      { seed: 7, numRuns: 3000 },
    );
  });

  it('JSON text: any JSON value, entries with hostile fields, and any string', () => {
    const hostile = fc.oneof(fc.double(), fc.constantFrom(1e39, -3.5e38, 1e308, 2 ** 53, 1.5, -1, 1e300), fc.string(), fc.constant(null), fc.boolean());
    const entry = fc.record({
      type: fc.constantFrom('hello', 'batch-start', 'spectrum', 'batch-end', 'analyzer-status', 'calibration', '__proto__'),
      protocol: fc.constantFrom(1, 2, '1'),
      seq: hostile,
      t: hostile,
      boot: hostile,
      analyzer: fc.oneof(fc.constant('nir-1'), fc.string()),
      axis: fc.array(hostile, { maxLength: 6 }),
      values: fc.array(hostile, { maxLength: 6 }),
      unit: fc.string(),
      batch: fc.string(),
      product: fc.string(),
      status: fc.constantFrom('good', 'failure', 'nope'),
    });
    fc.assert(
      fc.property(fc.oneof(fc.json(), entry.map((m) => JSON.stringify(m)), fc.string(), entry.map((m) => JSON.stringify(m).replace(/1e\+300/g, '1e999'))), (text) => {
        const e = decodeOrRefuse(() => parseAnalyzerText(text));
        if (e) judgeable(e);
      }),
      { seed: 1205, numRuns: 5000 },
    );
  });
});

describe('a real server under fuzzing', () => {
  let ts: TestServer;
  beforeAll(async () => {
    // the chaos is mostly bad messages: the per-connection error budget would (rightly) close it
    ts = await startTestServer({ ingest: { maxErrorsPer10s: 1_000_000 } }, { units: ['fz-1', 'fz-2'] });
  });
  afterAll(async () => {
    await ts?.stop();
  });

  for (const [seed, unit] of [[3, 'fz-1'], [4, 'fz-2']] as const) {
    it(`seed ${seed}: 1500 hostile and valid messages; nothing internal, nothing acked lost, nothing unjudgeable stored, not wedged`, async () => {
      const r = await fuzzRound({ wsUrl: ts.wsUrl, token: ts.token, analyzer: 'nir-1', unit, storage: ts.server.ctx.storage, seed, messages: 1500 });
      expect(r.problems).toEqual([]);
      expect(r.errors.internal ?? 0).toBe(0);
      // the mix did exercise the refusals and the store
      for (const code of ['non-finite', 'time-implausible', 'bad-frame', 'bad-message', 'seq-gap', 'conflict']) expect(r.errors[code] ?? 0, code).toBeGreaterThan(0);
      expect(r.storedSpectra).toBeGreaterThan(100);
    }, 240_000);
  }
});
