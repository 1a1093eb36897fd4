/**
 * A batch id taken by a command-line import moments before a live analyzer starts a batch with the
 * same id. The running server learns of batches imported by another process only every ~2 s, so
 * the batch-start passes its in-memory check and meets the imported row in the group commit (unique
 * key). That commit must not take every analyzer down with it: only that batch-start is refused
 * (`batch-id-taken`, naming the batch id, its seq consumed), every other entry of the commit is
 * stored and acked, no connection is closed, and the unit's outbox stays numbered without a gap.
 *
 * Through the public paths: the real CLI (`tideline import`) as a child process on the server's
 * data folder, two analyzers as real WebSocket clients. The server's clock is held still so that
 * the periodic re-read of batch ids (every 2 s of server time) cannot happen between the import and
 * the batch-start: the test meets the race every time instead of most times.
 */
import { execFile } from 'node:child_process';
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { promisify } from 'node:util';
import Database from 'better-sqlite3';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { Peer, axis, capturingLogger, spectrum, startTestServer, type TestServer, analyzerToken } from './helpers.ts';

const run = promisify(execFile);
const T = Date.now();
const log = capturingLogger();
let ts: TestServer;

beforeAll(async () => {
  ts = await startTestServer({}, { units: ['dryer-1', 'dryer-2'], now: () => T, log });
}, 60_000);
afterAll(async () => {
  await ts?.stop();
});

describe('a live batch-start naming a batch just imported by the CLI', () => {
  it('is refused alone (batch-id-taken); the other analyzer, every acked entry and both connections go on', async () => {
    const t0 = T - 120_000;
    // Analyzer A streams a batch on dryer-2 the whole time.
    const a = new Peer(ts.wsUrl, ts.token);
    await a.open();
    expect((await a.hello('nir-1', 1, axis(16))).type).toBe('welcome');
    a.send({ type: 'batch-start', seq: 0, t: t0, unit: 'dryer-2', batch: 'B-run', product: 'granule' });
    for (let k = 1; k <= 40; k++) a.sendFrame(k, t0 + k * 1000, spectrum(16, k));
    await a.waitAck(40);

    // The site imports a historic batch with the command line, beside the running server.
    const file = join(ts.dir, 'B-clash.csv');
    writeFileSync(file, `batch,time_ms,1100,1102,1104\nB-clash,${t0},0.1,0.2,0.3\nB-clash,${t0 + 10_000},0.15,0.25,0.35\nB-clash,${t0 + 20_000},0.2,0.3,0.4\n`);
    const imp = await run(process.execPath, ['--import', 'tsx', 'server/cli.ts', 'import', '--unit', 'dryer-1', '--product', 'granule', '--data-dir', ts.dir, file], {
      env: { ...process.env, TIDELINE_LOG_LEVEL: 'warn' },
    });
    expect(imp.stdout).toMatch(/imported B-clash: 3 spectra/);

    // Analyzer B starts a live batch with the same id, while A's spectra go into the same commits.
    const tokenB = await analyzerToken(ts.server.ctx.storage, 'nir-2');
    const b = new Peer(ts.wsUrl, tokenB);
    await b.open();
    expect((await b.hello('nir-2', 7, axis(16))).type).toBe('welcome');
    for (let k = 41; k <= 60; k++) a.sendFrame(k, t0 + k * 1000, spectrum(16, k));
    b.send({ type: 'batch-start', seq: 0, t: t0 + 30_000, unit: 'dryer-1', batch: 'B-clash', product: 'granule' });
    b.sendFrame(1, t0 + 31_000, spectrum(16, 1));
    for (let k = 61; k <= 80; k++) a.sendFrame(k, t0 + k * 1000, spectrum(16, k));

    const e = await b.waitError('batch-id-taken');
    expect(e.seq).toBe(0);
    expect(e.message).toMatch(/batch id "B-clash" is already used/);
    // The batch did not start, so its first spectrum has no open batch (refused, seq consumed).
    expect((await b.waitError('no-open-batch')).seq).toBe(1);
    await b.waitAck(1);
    // B goes on with a fresh id on the same connection.
    b.send({ type: 'batch-start', seq: 2, t: t0 + 32_000, unit: 'dryer-1', batch: 'B-fresh', product: 'granule' });
    for (let k = 3; k <= 5; k++) b.sendFrame(k, t0 + 30_000 + k * 1000, spectrum(16, k));
    await b.waitAck(5);
    await a.waitAck(80);

    expect(a.closed).toBeNull();
    expect(b.closed).toBeNull();
    expect(a.messages.filter((m) => m.type === 'error')).toEqual([]);
    expect(b.messages.filter((m) => m.type === 'error').map((m) => m.code)).toEqual(['batch-id-taken', 'no-open-batch']);
    expect(log.lines.filter((l) => /dropping their connections/.test(l.text))).toEqual([]);
    // it was the commit that met the imported row (the race), not the in-memory list of ids
    expect(log.lines.filter((l) => l.level === 'warn' && /batch id "B-clash" is already used \(stored by another path.*only this batch-start is refused/.test(l.text))).toHaveLength(1);

    const st = ts.server.ctx.storage;
    expect((await st.readSpectra('B-run', 0, 1e15, 1000)).map((r) => r.seq)).toEqual(Array.from({ length: 80 }, (_, i) => i + 1));
    // The imported batch is untouched: its own three spectra, nothing of the live analyzer.
    expect(await st.getBatch('B-clash')).toMatchObject({ unit: 'dryer-1', status: 'ended', spectrumCount: 3 });
    expect((await st.readSpectra('B-clash', 0, 1e15, 100)).map((r) => r.t)).toEqual([t0, t0 + 10_000, t0 + 20_000]);
    expect(await st.getBatch('B-fresh')).toMatchObject({ unit: 'dryer-1', analyzer: 'nir-2', status: 'open', spectrumCount: 3 });

    const db = new Database(join(ts.dir, 'tideline.db'), { readonly: true });
    try {
      const rejected = db.prepare('SELECT seq, code, message FROM rejected_entries WHERE analyzer = ? ORDER BY seq').all('nir-2') as { seq: number; code: string; message: string }[];
      expect(rejected.map((r) => [r.seq, r.code])).toEqual([[0, 'batch-id-taken'], [1, 'no-open-batch']]);
      // dryer-1's outbox: B-fresh's start, numbered from 1 with no hole where the refused start was
      const rows = db.prepare("SELECT unit_seq AS seq, type, json_extract(payload, '$.batch') AS batch FROM outbox WHERE unit = 'dryer-1' ORDER BY unit_seq").all() as { seq: number; type: string; batch: string }[];
      expect(rows.map((r) => r.seq)).toEqual(rows.map((_, i) => i + 1));
      expect(rows.filter((r) => r.type === 'batch-start').map((r) => r.batch)).toEqual(['B-fresh']);
    } finally {
      db.close();
    }
    a.close();
    b.close();
  }, 120_000);
});
