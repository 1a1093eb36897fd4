/**
 * Bad pixels through the public paths: an analyzer streams a batch over /ingest whose spectra have
 * two stuck pixels for a while and one spectrum with a block of dead pixels. The stuck-pixel spectra
 * are judged by TSR and marked in their stored results, the damaged one is stored but not judged,
 * and the repeated damage raises an analyzer-quality alarm that clears on clean spectra
 * (docs/bad-pixels.md). The flags are stored in the results' quality column.
 */
import Database from 'better-sqlite3';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch } from '../../simulators/batch.ts';
import { Peer, login, startTestServer, type Session, type TestServer } from './helpers.ts';
import { buildSmallDryerModel, installModel } from './model-fixture.ts';

let ts: TestServer;
let viewer: Session;
const batch = simulateDryerBatch({ seed: 31, id: 'pixels' });
beforeAll(async () => {
  ts = await startTestServer({}, { units: ['dryer-1'] });
  const { model, text } = buildSmallDryerModel();
  await installModel(ts.server.ctx.storage, text, model, 'dryer-1');
  await ts.server.ctx.ingest.refreshDeployment('dryer-1');
  viewer = await login(ts, 'viewer');
}, 120_000);
afterAll(async () => {
  await ts?.stop();
});

describe('spectra with bad pixels over /ingest', () => {
  it('judges a few bad pixels by TSR, stores a damaged spectrum unjudged, raises and clears the analyzer-quality alarm', async () => {
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    await p.hello('nir-1', 1, batch.axis);
    p.send({ type: 'batch-start', seq: 0, t: batch.start, unit: 'dryer-1', batch: 'pixels', product: 'granule A' });
    const frozen = batch.spectra[20]!;
    let seq = 1;
    const seqOf = new Map<number, number>();
    for (let i = 0; i < 60; i++) {
      const x = Array.from(batch.spectra[i]!);
      if (i >= 20 && i < 40) { x[60] = frozen[60]!; x[61] = frozen[61]!; }
      if (i === 30) for (let j = 150; j < 190; j++) x[j] = 0;
      seqOf.set(i, seq);
      p.send({ type: 'spectrum', seq: seq++, t: batch.times[i]!, values: x });
    }
    await p.waitAck(seq - 1);
    p.close();

    const res = (await viewer.get('/api/batches/pixels/results?limit=1000')).body.items as any[];
    expect(res).toHaveLength(60);
    const at = (i: number) => res.find((r) => r.seq === seqOf.get(i))!;
    expect(at(10).quality).toBeUndefined();
    expect(at(26).quality).toMatchObject({ judged: true, scoredBy: 'tsr', badPixels: 2, flags: { stuck: 2 } });
    expect(typeof at(26).t2).toBe('number');
    expect(at(30).quality).toMatchObject({ judged: false, scoredBy: null });
    expect(at(30).quality.flags.dead).toBe(40);
    expect(at(30).t2).toBeNull();

    const alarms = (await viewer.get('/api/alarms?batch=pixels&limit=100')).body.items as any[];
    const a = alarms.find((x) => x.key === 'pixel-quality');
    expect(a, JSON.stringify(alarms.map((x) => [x.kind, x.key]))).toBeDefined();
    expect(a.kind).toBe('analyzer');
    expect(a.active).toBe(false); // clean again from spectrum 40
    expect(a.state).toBe('cleared-unacknowledged');
    expect(a.message).toMatch(/no bad pixels on 5 spectra/);
    expect(alarms.some((x) => x.key === 'q' || x.key === 't2')).toBe(false);

    // The flags sit in the results' own column.
    const db = new Database(join(ts.dir, 'tideline.db'), { readonly: true, fileMustExist: true });
    try {
      const rows = db.prepare('SELECT seq, t2, quality FROM results WHERE batch = ? AND quality IS NOT NULL ORDER BY idx').all('pixels') as { seq: number; t2: number | null; quality: string }[];
      expect(rows.length).toBeGreaterThanOrEqual(16);
      const damaged = rows.find((r) => r.seq === seqOf.get(30))!;
      expect(damaged.t2).toBeNull();
      expect(JSON.parse(damaged.quality).reason).toMatch(/42 of 256 pixels are bad \(dead 40, stuck 2\)/);
    } finally {
      db.close();
    }
  }, 120_000);
});
