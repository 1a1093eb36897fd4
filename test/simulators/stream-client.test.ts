import { spawn } from 'node:child_process';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import type { SpectrumEntry, BatchStartMessage, BatchEndMessage } from '../../core/protocol/ingest-messages.ts';
import { simulateDryerBatch } from '../../simulators/dryer.ts';
import { simulateReactorBatch } from '../../simulators/reactor.ts';
import { parseTokensFile, runStreams } from '../../simulators/load.ts';
import { AnalyzerClient } from '../../simulators/stream-client.ts';
import type { SimulatedBatch } from '../../simulators/batch-types.ts';
import { IngestPeer, type StreamLog } from './ingest-peer.ts';

let peer: IngestPeer | null = null;
afterEach(async () => {
  await peer?.stop();
  peer = null;
});

async function startPeer(o: ConstructorParameters<typeof IngestPeer>[0]): Promise<IngestPeer> {
  peer = new IngestPeer(o);
  await peer.start();
  return peer;
}

/** The persisted log must hold exactly the batch: start, every transmitted spectrum in order, end. */
function expectLogHoldsBatch(log: StreamLog, batch: SimulatedBatch, from = 0): number {
  const e = log.entries;
  e.forEach((x, i) => expect(x.seq).toBe(i)); // contiguous, no duplicates
  const start = e[from] as BatchStartMessage;
  expect(start.type).toBe('batch-start');
  expect(start.batch).toBe(batch.id);
  const dropped = new Set(batch.truth.dropped);
  const sent = batch.spectra.map((s, i) => ({ s, i })).filter(({ i }) => !dropped.has(i));
  sent.forEach(({ s, i }, k) => {
    const got = e[from + 1 + k] as SpectrumEntry;
    expect(got.type, `entry ${from + 1 + k}`).toBe('spectrum');
    expect(Array.from(got.values)).toEqual(Array.from(s));
    expect(got.t - start.t).toBe(batch.times[i]! - batch.start);
  });
  const end = e[from + 1 + sent.length] as BatchEndMessage;
  expect(end.type).toBe('batch-end');
  expect(end.batch).toBe(batch.id);
  return from + 2 + sent.length;
}

describe('AnalyzerClient against a protocol-conformant test peer', () => {
  it('streams a batch as binary frames; after a dropped connection mid-batch it resends so the log is complete without duplicates', async () => {
    const p = await startPeer({ tokens: { tok1: 'sim-dryer-1' }, dropAfterEntries: 120 });
    const batch = simulateDryerBatch({ seed: 4 });
    const c = new AnalyzerClient({ url: p.url, token: 'tok1', analyzer: 'sim-dryer-1', axis: batch.axis, boot: 1000, window: 16, backoff: { initialMs: 20, maxMs: 200 } });
    await c.sendBatch(batch, { speed: 0 });
    await c.close();
    expect(p.dropped).toBe(1);
    expect(p.connections).toBe(2);
    const [log] = p.stream('sim-dryer-1');
    expect(expectLogHoldsBatch(log!, batch)).toBe(log!.entries.length);
    const s = c.stats();
    expect(s.reconnects).toBe(1);
    expect(s.acked).toBe(log!.entries.length - 1);
    expect(s.pending).toBe(0);
    expect(s.spectra).toBe(batch.spectra.length);
    expect(log!.maxInFlightSeen).toBeLessThanOrEqual(16);
  });

  it('sends JSON spectra, skips drop-out gaps and keeps seq contiguous across batches with rising timestamps', async () => {
    const p = await startPeer({ tokens: { tok2: 'sim-reactor-1' }, dropAfterEntries: 300 });
    const b1 = simulateReactorBatch({ seed: 8, id: 'r-1', intervalS: 60, faults: [{ type: 'dropout', onsetS: 3600, params: { durationS: 600 } }] });
    const b2 = simulateReactorBatch({ seed: 9, id: 'r-2', intervalS: 60 });
    expect(b1.truth.dropped.length).toBe(10);
    expect(b1.spectra.length).toBeLessThan(290); // the drop comes in the second batch
    const c = new AnalyzerClient({ url: p.url, token: 'tok2', analyzer: 'sim-reactor-1', axis: b1.axis, binary: false, boot: 2000, backoff: { initialMs: 20 } });
    await c.sendBatch(b1, { speed: 0 });
    await c.sendBatch(b2, { speed: 0 });
    await c.close();
    const [log] = p.stream('sim-reactor-1');
    const next = expectLogHoldsBatch(log!, b1);
    expect(expectLogHoldsBatch(log!, b2, next)).toBe(log!.entries.length);
    expect(log!.entries[next]!.t).toBeGreaterThan(log!.entries[next - 1]!.t);
    expect(c.stats().reconnects).toBe(1);
  });

  it('never has more than `window` entries in flight while acks are slow', async () => {
    const p = await startPeer({ tokens: { tok3: 'a3' }, ackDelayMs: 15 });
    const batch = simulateDryerBatch({ seed: 5, intervalS: 60 });
    const c = new AnalyzerClient({ url: p.url, token: 'tok3', analyzer: 'a3', axis: batch.axis, window: 5, boot: 3 });
    await c.sendBatch(batch, { speed: 0, timestamps: 'original' });
    await c.close();
    const [log] = p.stream('a3');
    expectLogHoldsBatch(log!, batch);
    expect(log!.entries[1]!.t).toBe(batch.times[0]);
    expect(log!.maxInFlightSeen).toBeLessThanOrEqual(5);
    expect(log!.maxInFlightSeen).toBeGreaterThan(1);
  });

  it('retries with backoff while the server refuses upgrades, then streams', async () => {
    const p = await startPeer({ tokens: { tok4: 'a4' }, refuseFirst: 3 });
    const batch = simulateDryerBatch({ seed: 6, intervalS: 120 });
    const lines: string[] = [];
    const c = new AnalyzerClient({ url: p.url, token: 'tok4', analyzer: 'a4', axis: batch.axis, boot: 4, backoff: { initialMs: 10, maxMs: 40 }, log: (l) => lines.push(l) });
    await c.sendBatch(batch, { speed: 0 });
    await c.close();
    expect(p.upgrades).toBe(4);
    expectLogHoldsBatch(p.stream('a4')[0]!, batch);
    expect(lines.some((l) => /HTTP 503/.test(l))).toBe(true);
  });

  it('a restarted client with the same boot epoch continues after the persisted seq', async () => {
    const p = await startPeer({ tokens: { tok5: 'a5' } });
    const b1 = simulateDryerBatch({ seed: 1, id: 'x-1', intervalS: 120 });
    const b2 = simulateDryerBatch({ seed: 2, id: 'x-2', intervalS: 120 });
    const c1 = new AnalyzerClient({ url: p.url, token: 'tok5', analyzer: 'a5', axis: b1.axis, boot: 55 });
    await c1.sendBatch(b1, { speed: 0 });
    await c1.close();
    const c2 = new AnalyzerClient({ url: p.url, token: 'tok5', analyzer: 'a5', axis: b1.axis, boot: 55 });
    await c2.sendBatch(b2, { speed: 0 });
    await c2.close();
    const logs = p.stream('a5');
    expect(logs).toHaveLength(1);
    const next = expectLogHoldsBatch(logs[0]!, b1);
    expect(expectLogHoldsBatch(logs[0]!, b2, next)).toBe(logs[0]!.entries.length);
  });

  it('notices a silent (half-open) connection by its heartbeat, reconnects and completes the log', async () => {
    const p = await startPeer({ tokens: { tok7: 'a7' }, silentAfterEntries: 30 });
    const batch = simulateDryerBatch({ seed: 7, intervalS: 60 });
    const lines: string[] = [];
    const c = new AnalyzerClient({ url: p.url, token: 'tok7', analyzer: 'a7', axis: batch.axis, boot: 7, heartbeatMs: 40, backoff: { initialMs: 10 }, log: (l) => lines.push(l) });
    await c.sendBatch(batch, { speed: 0 });
    await c.close();
    expect(p.silenced).toBe(1);
    expect(p.connections).toBe(2);
    expect(lines.some((l) => /nothing heard from the server/.test(l))).toBe(true);
    expectLogHoldsBatch(p.stream('a7')[0]!, batch);
  });

  it('an aborted batch ends at once with batch-end "stopped by operator", flushed and contiguous', async () => {
    const p = await startPeer({ tokens: { tok9: 'a9' } });
    const batch = simulateDryerBatch({ seed: 9 });
    const c = new AnalyzerClient({ url: p.url, token: 'tok9', analyzer: 'a9', axis: batch.axis });
    const ac = new AbortController();
    const sending = c.sendBatch(batch, { speed: 2000, signal: ac.signal });
    while (c.stats().acked < 20) await new Promise((r) => setTimeout(r, 2));
    ac.abort();
    const r = await sending;
    await c.close();
    expect(r.stopped).toBe(true);
    expect(r.spectra).toBeGreaterThanOrEqual(19);
    expect(r.spectra).toBeLessThan(batch.spectra.length);
    const log = p.stream('a9')[0]!;
    log.entries.forEach((x, i) => expect(x.seq).toBe(i));
    expect(log.entries).toHaveLength(r.spectra + 2);
    const end = log.entries[log.entries.length - 1] as BatchEndMessage;
    expect(end).toMatchObject({ type: 'batch-end', reason: 'stopped by operator', seq: r.endSeq });
  });

  it('refuses a second batch on the same analyzer while one is being sent', async () => {
    const p = await startPeer({ tokens: { tok8: 'a8' } });
    const batch = simulateDryerBatch({ seed: 8, intervalS: 120 });
    const c = new AnalyzerClient({ url: p.url, token: 'tok8', analyzer: 'a8', axis: batch.axis });
    const first = c.sendBatch(batch, { speed: 0 });
    await expect(c.sendBatch(batch, { speed: 0 })).rejects.toThrow(/already being sent/);
    await first;
    await c.close();
  });

  it('rejects with a clear message when the token is refused or the server rejects an entry', async () => {
    const p = await startPeer({ tokens: { good: 'a6' }, units: ['dryer-9'] });
    const batch = simulateDryerBatch({ seed: 6, intervalS: 300 });
    const bad = new AnalyzerClient({ url: p.url, token: 'wrong', analyzer: 'a6', axis: batch.axis });
    await expect(bad.start()).rejects.toThrow(/HTTP 401.*token/);
    await bad.close();
    const c = new AnalyzerClient({ url: p.url, token: 'good', analyzer: 'a6', axis: batch.axis });
    await expect(c.sendBatch(batch, { speed: 0, unit: 'dryer-1' })).rejects.toThrow(/unknown-unit/);
    expect(c.stats().errors[0]!.code).toBe('unknown-unit');
    await c.close();
    expect(() => new AnalyzerClient({ url: 'http://x', token: 't', analyzer: 'a', axis: [1, 2] })).toThrow(/ws:\/\//);
  });

  it('load mode runs many analyzers at once, each with its own token and unit', async () => {
    const ids = parseTokensFile(Array.from({ length: 6 }, (_, k) => `load-${k + 1} tok-${k + 1} dryer-${k + 1}`).join('\n') + '\n# comment\n');
    const p = await startPeer({ tokens: Object.fromEntries(ids.map((i) => [i.token, i.analyzer])), units: ids.map((i) => i.unit!), dropAfterEntries: 500 });
    const r = await runStreams({ url: p.url, kind: 'dryer', identities: ids, batches: 2, seed: 3, speed: 0, binary: true, intervalS: 60, boot: 100 });
    expect(r.analyzers).toBe(6);
    expect(r.batches).toBe(12);
    let total = 0;
    for (const id of ids) {
      const [log] = p.stream(id.analyzer);
      log!.entries.forEach((x, i) => expect(x.seq).toBe(i));
      const starts = log!.entries.filter((x) => x.type === 'batch-start') as BatchStartMessage[];
      expect(starts.map((s) => s.unit)).toEqual([id.unit, id.unit]);
      total += log!.entries.filter((x) => x.type === 'spectrum').length;
    }
    expect(total).toBe(r.spectra);
    expect(p.dropped).toBe(1);
  });

  it('the CLI streams batches to the peer (`sim stream dryer --url … --token …`)', async () => {
    const p = await startPeer({ tokens: { clitok: 'sim-dryer-1' } });
    const child = spawn(process.execPath, ['--import', 'tsx', 'simulators/cli.ts', 'stream', 'dryer', '--url', p.url, '--token', 'clitok', '--speed', '0', '--batches', '2', '--interval', '60', '--seed', '3'], {
      cwd: join(import.meta.dirname, '../..'),
    });
    let out = '';
    child.stdout.on('data', (d) => (out += d));
    const code = await new Promise<number | null>((r) => child.on('close', r));
    expect(code, out).toBe(0);
    expect(out).toMatch(/1 analyzer\(s\), 2 batch\(es\), \d+ spectra/);
    const [log] = p.stream('sim-dryer-1');
    log!.entries.forEach((x, i) => expect(x.seq).toBe(i));
    expect(log!.entries.filter((x) => x.type === 'batch-end')).toHaveLength(2);
  }, 300_000);

  it('tokens file errors name the line', () => {
    expect(() => parseTokensFile('a b c d\n', 'f.txt')).toThrow(/f.txt line 1/);
    expect(() => parseTokensFile('# only a comment\n', 'f.txt')).toThrow(/names no analyzers/);
  });
});
