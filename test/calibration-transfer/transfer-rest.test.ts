/**
 * Replacing an analyzer through the public paths: transfer sets (the same samples on the old and on
 * a simulated new analyzer — another grid, a wavelength calibration 1.2 nm off, a broader line shape,
 * another gain and offset; simulators/second-analyzer.ts) imported as CSV batches; a PDS transfer of
 * the approved version through REST, a DS transfer through the command line; the version page's
 * judgement on held-out sets; and good batches of the new analyzer judged without transfer (imported
 * onto the model's axis by linear interpolation, judged by the old version) and with it (imported as
 * measured, judged by the transferred version), against the old analyzer's own batches of the same
 * process as the nominal reference.
 */
import { spawn } from 'node:child_process';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateBatch } from '../../simulators/batch.ts';
import { simulateOnSecondAnalyzer } from '../../simulators/second-analyzer.ts';
import { writeBatchCsv } from '../../core/io/batch-csv.ts';
import type { SimulatedBatch } from '../../simulators/batch-types.ts';
import { Peer, login, startTestServer, type Session, type TestServer } from '../server/helpers.ts';
import { DRYER_TEST_SETTINGS } from '../monitor/settings-fixture.ts';

let ts: TestServer;
let owner: Session;
let sourceId: string;
let sourceSha: string;

function csvOf(b: SimulatedBatch, id: string, every = 1, withLab = false): { name: string; content: string } {
  const idx = b.spectra.map((_, i) => i).filter((i) => i % every === 0);
  const lab = withLab ? { properties: { moisture: idx.map((i, k) => (k % 4 === 0 ? b.truth.property.values[i]! : NaN)) }, propertyUnits: { moisture: '% w/w' } } : { properties: {} as Record<string, number[]> };
  return { name: `${id}.csv`, content: writeBatchCsv([{ id, axis: Float64Array.from(b.axis), times: idx.map((i) => b.times[i]!), spectra: idx.map((i) => b.spectra[i]!), ...lab }]) };
}

async function importFiles(files: { name: string; content: string }[], resampleToModel?: string) {
  const r = await owner.post('/api/import', { unit: 'dryer-1', product: 'granule A', files, ...(resampleToModel ? { resampleToModel } : {}) });
  expect(r.status, JSON.stringify(r.body)).toBe(201);
}

const REFERENCE = [901, 902, 903, 904, 905, 906, 907, 908, 909, 910];
const FIT = [951, 952, 953];
const HELD = [961, 962];
const GOOD = [971, 972, 973, 974, 975, 976, 977, 978];

beforeAll(async () => {
  ts = await startTestServer({}, { units: ['dryer-1', 'dryer-2'] });
  owner = await login(ts, 'model-owner');
  // The version in use on the old analyzer: built through REST from imported reference batches with lab moisture.
  await importFiles(REFERENCE.map((s) => csvOf(simulateBatch('dryer', { seed: s, intervalS: 60 }), `REF-${s}`, 1, true)));
  const { name: _n, product: _p, author: _a, createdAt: _c, ...settings } = DRYER_TEST_SETTINGS;
  const built = await owner.post('/api/models/build', { name: 'dryer-test', product: 'granule A', referenceBatches: REFERENCE.map((s) => `REF-${s}`), settings });
  expect(built.status, JSON.stringify(built.body)).toBe(201);
  sourceId = built.body.versionId;
  sourceSha = built.body.sha256;
  const sets = [...FIT, ...HELD];
  // Transfer sets: every 6th spectrum of a batch, as the old and as the new analyzer saw it; lab moisture on some.
  await importFiles(sets.map((s) => csvOf(simulateBatch('dryer', { seed: s, intervalS: 60 }), `TS-OLD-${s}`, 6, true)));
  await importFiles(sets.map((s) => csvOf(simulateOnSecondAnalyzer('dryer', { seed: s, intervalS: 60 }), `TS-NEW-${s}`, 6)));
  // Good batches: on the old analyzer; on the new one as measured; the same new files interpolated onto the model's axis.
  await importFiles(GOOD.map((s) => csvOf(simulateBatch('dryer', { seed: s, intervalS: 60 }), `G-OLD-${s}`)));
  const newGood = GOOD.map((s) => simulateOnSecondAnalyzer('dryer', { seed: s, intervalS: 60 }));
  await importFiles(newGood.map((b, k) => csvOf(b, `G-NEW-${GOOD[k]}`)));
  await importFiles(newGood.map((b, k) => csvOf(b, `G-INTERP-${GOOD[k]}`)), sourceId);
}, 300_000);
afterAll(async () => {
  await ts?.stop();
});

/** The command line, run without blocking this process (the server under test lives in it). */
function cli(args: string[]): Promise<{ status: number | null; stdout: string; stderr: string }> {
  return new Promise((resolve) => {
    const c = spawn(process.execPath, ['--import', 'tsx', 'server/cli.ts', ...args]);
    let stdout = '';
    let stderr = '';
    c.stdout.on('data', (d) => (stdout += d));
    c.stderr.on('data', (d) => (stderr += d));
    c.on('close', (status) => resolve({ status, stdout, stderr }));
  });
}

const pair = (s: number) => ({ old: `TS-OLD-${s}`, new: `TS-NEW-${s}` });

describe('analyzer replacement through REST and the command line', () => {
  let movedId: string;

  it('a PDS transfer is a new draft version whose file carries the transform and its judgement under its hash', async () => {
    const r = await owner.post(`/api/models/versions/${sourceId}/transfer`, { method: 'pds', window: 7, rcond: 1e-4, fit: FIT.map(pair), heldOut: HELD.map(pair) });
    expect(r.status, JSON.stringify(r.body)).toBe(201);
    expect(r.body).toMatchObject({ name: 'dryer-test', version: 2, status: 'draft' });
    movedId = r.body.versionId;
    const file = (await owner.get(`/api/models/versions/${movedId}/model.json`)).body as { version: number; sha256: string; body: { transfer: { transform: { method: string; slaveAxis: number[] } } } };
    expect(file.version).toBe(2);
    expect(file.sha256).toBe(r.body.sha256);
    expect(file.body.transfer.transform.method).toBe('pds');
    expect(file.body.transfer.transform.slaveAxis).toHaveLength(241);
    const d = (await owner.get(`/api/models/versions/${movedId}`)).body;
    const j = d.transfer.judgement;
    console.log(`held-out transfer samples ${j.spectra}: beyond T² or Q — old analyzer ${j.old.beyond}, new without transfer ${j.before.beyond}, with PDS ${j.after.beyond}; moisture RMS vs old prediction ${j.property.vsOld.before.toFixed(3)} → ${j.property.vsOld.after.toFixed(4)} % w/w; vs ${j.property.vsLab.n} lab values ${j.property.vsLab.before.toFixed(3)} → ${j.property.vsLab.after.toFixed(3)} (old ${j.property.vsLab.old.toFixed(3)})`);
    expect(d.transfer).toMatchObject({ method: 'pds', window: 7, oldAxis: { points: 256 }, newAxis: { points: 241 }, source: { versionId: sourceId, sha256: sourceSha }, fit: FIT.map((s) => ({ ...pair(s), spectra: expect.any(Number) })) });
    expect(j.before.rate).toBeGreaterThan(0.5);
    expect(j.after.rate).toBeLessThan(0.1);
    expect(j.farAbove).toBe(false);
    expect(j.property.off).toBe(false);
    expect(j.property.vsLab.n).toBeGreaterThan(0);
    expect(j.property.vsLab.after).toBeLessThan(j.property.vsLab.before);
    const audit = (await owner.get('/api/audit?limit=50')).body;
    expect(JSON.stringify(audit)).toContain('model.transfer');
  });

  it("the new analyzer's good batches: most alarm without transfer, about as few as the old analyzer's with PDS", async () => {
    const evaluate = async (version: string, prefix: string) => {
      const r = await owner.post(`/api/models/versions/${version}/evaluate`, { batches: GOOD.map((s) => `${prefix}-${s}`) });
      expect(r.status, JSON.stringify(r.body)).toBe(200);
      const bs = r.body.batches as { spectra: number; pointsOutside: number; alarms: number }[];
      return { alarmed: bs.filter((b) => b.alarms > 0).length, points: bs.reduce((s, b) => s + b.spectra, 0), outside: bs.reduce((s, b) => s + b.pointsOutside, 0) };
    };
    const old = await evaluate(sourceId, 'G-OLD');
    const without = await evaluate(sourceId, 'G-INTERP');
    const withPds = await evaluate(movedId, 'G-NEW');
    console.log(`${GOOD.length} good batches — batches with an alarm / spectra beyond the 99 % T² or Q limit: old analyzer ${old.alarmed} / ${old.outside} of ${old.points}; new analyzer without transfer ${without.alarmed} / ${without.outside}; with PDS ${withPds.alarmed} / ${withPds.outside}`);
    expect(without.alarmed).toBeGreaterThan(GOOD.length / 2);
    expect(without.outside / without.points).toBeGreaterThan(0.5);
    expect(withPds.alarmed).toBeLessThanOrEqual(old.alarmed + 1);
    expect(withPds.outside / withPds.points).toBeLessThan(Math.max(0.05, 2 * (old.outside / old.points)));
  }, 300_000);

  it('approved and deployed on the unit the new analyzer feeds, it judges a live batch over /ingest', async () => {
    const d = (await owner.get(`/api/models/versions/${movedId}`)).body;
    const early = (d.endpointCheck?.early ?? 0) > 0;
    // The evaluation above on the new analyzer's good batches is this version's approval evidence: a
    // ten-batch model's Q limit is as tight on them as the source version's on the old analyzer's.
    const ev = (await owner.get(`/api/models/versions/${movedId}/approval-evidence`)).body as { warnings: { blocking: boolean }[] };
    const far = ev.warnings.some((w) => w.blocking);
    const a = await owner.post(`/api/models/versions/${movedId}/approve`, {
      reason: 'new analyzer on dryer-2', password: 'correct horse battery staple 42',
      ...(early ? { earlyEndpointOverride: 'as for the source version' } : {}),
      ...(far ? { evidenceOverride: 'the source version has the same rate on the old analyzer' } : {}),
    });
    expect(a.status, JSON.stringify(a.body)).toBe(200);
    const dep = await owner.post('/api/deployments', { unit: 'dryer-2', versionId: movedId, reason: 'analyzer replaced' });
    expect(dep.status, JSON.stringify(dep.body)).toBe(201);
    const b = simulateOnSecondAnalyzer('dryer', { seed: 981, intervalS: 60 });
    const peer = new Peer(ts.wsUrl, ts.token);
    await peer.open();
    await peer.hello('nir-1', 11, b.axis);
    let seq = 0;
    peer.send({ type: 'batch-start', seq: seq++, t: b.times[0]!, unit: 'dryer-2', batch: 'LIVE-NEW-1', product: 'granule A' });
    for (let i = 0; i < b.spectra.length; i++) peer.sendFrame(seq++, b.times[i]!, b.spectra[i]!);
    peer.send({ type: 'batch-end', seq: seq++, t: b.times[b.times.length - 1]! + 1, batch: 'LIVE-NEW-1' });
    await peer.waitAck(seq - 1, 60_000);
    peer.close();
    const r = (await owner.get('/api/batches/LIVE-NEW-1/results?limit=5000')).body as { model: { versionId: string }; items: { t2: number; q: number; limits: { t2: number; q: number } }[] };
    expect(r.model.versionId).toBe(movedId);
    expect(r.items).toHaveLength(b.spectra.length);
    const beyond = r.items.filter((x) => x.t2 > x.limits.t2 || x.q > x.limits.q).length;
    console.log(`live batch of the new analyzer judged by the transferred version: ${beyond} of ${r.items.length} spectra beyond the 99 % T² or Q limit`);
    expect(beyond / r.items.length).toBeLessThan(0.1);
    // The version built on the old analyzer does not fit dryer-2: the deploy preview names both axes.
    const old = await owner.get(`/api/deployments/preview?unit=dryer-2&versionId=${sourceId}`);
    expect(old.status).toBe(200);
    const axis = (old.body.mismatches as { what: string; text: string }[]).find((m) => m.what === 'axis')!;
    expect(axis.text).toContain('256 points');
    expect(axis.text).toContain('241 points');
  }, 300_000);

  it('refuses bad requests, naming the problem', async () => {
    const bad = await owner.post(`/api/models/versions/${sourceId}/transfer`, { method: 'pds', window: 6, fit: FIT.map(pair), heldOut: HELD.map(pair) });
    expect(bad.status).toBe(400);
    expect(JSON.stringify(bad.body)).toContain('odd number');
    const noHeld = await owner.post(`/api/models/versions/${sourceId}/transfer`, { method: 'pds', window: 7, fit: FIT.map(pair), heldOut: [] });
    expect(noHeld.status).toBe(400);
    expect(JSON.stringify(noHeld.body)).toContain('held-out');
    const missing = await owner.post(`/api/models/versions/${sourceId}/transfer`, { method: 'ds', fit: [{ old: 'TS-OLD-951', new: 'NOPE' }], heldOut: HELD.map(pair) });
    expect(missing.status).toBe(404);
    expect(missing.body.detail).toContain('"NOPE"');
    const swapped = await owner.post(`/api/models/versions/${sourceId}/transfer`, { method: 'ds', fit: [{ old: 'TS-NEW-951', new: 'TS-OLD-951' }], heldOut: HELD.map(pair) });
    expect(swapped.status).toBe(422);
    expect(swapped.body.detail).toContain('axis the model was built on');
  });

  it('a DS transfer of rank 1 through the command line is judged far off, and approval needs a signed override', async () => {
    const r = await cli(['model', 'transfer', 'dryer-test@1', '--method', 'ds', '--max-rank', '1', '--fit', FIT.map((s) => `TS-OLD-${s}=TS-NEW-${s}`).join(','), '--held-out', HELD.map((s) => `TS-OLD-${s}=TS-NEW-${s}`).join(','), '--by', 'cli-test', '--data-dir', ts.dir]);
    expect(r.status, r.stderr + r.stdout).toBe(0);
    expect(r.stdout).toMatch(/dryer-test v3 \(.*, draft\) carries a DS transfer from v1/);
    expect(r.stdout).toContain('Approval needs evidenceOverride');
    const v3 = ((await owner.get('/api/models')).body.items[0].versions as { version: number; versionId: string }[]).find((v) => v.version === 3)!;
    const d = (await owner.get(`/api/models/versions/${v3.versionId}`)).body;
    expect(d.transfer).toMatchObject({ method: 'ds', rank: { min: 1, max: 1 }, judgement: { property: { off: true } } });
    const a = await owner.post(`/api/models/versions/${v3.versionId}/approve`, { reason: 'new analyzer', password: 'correct horse battery staple 42' });
    expect(a.status).toBe(422);
    expect(a.body.detail).toContain('held-out transfer samples');
    const usage = await cli(['model', 'transfer', 'dryer-test@1', '--method', 'pds', '--fit', 'A', '--held-out', 'B=C', '--data-dir', ts.dir]);
    expect(usage.status).toBe(2);
    expect(usage.stderr).toContain('"A" is not OLD=NEW');
  }, 120_000);
});
