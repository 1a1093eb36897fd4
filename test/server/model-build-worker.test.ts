/**
 * Model builds run in a worker thread (server/models/build-runner.ts): the server answers while a
 * build computes, the model from the worker is byte for byte the one core builds in-process from
 * the same stored spectra, failures (bad settings, a worker that dies) come back as problem details
 * and the server goes on, and a second build while one runs is refused with 409.
 */
import { createHash } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateReferenceSet } from '../../simulators/batch.ts';
import { buildMonitoringModel, serializeMonitoringModel } from '../../core/model/monitoring-model.ts';
import { buildRunnerOf, loadReferenceBatch } from '../../server/models/model-service.ts';
import { Peer, login, startTestServer, type Session, type TestServer } from './helpers.ts';

let ts: TestServer;
let owner: Session;
const refs = simulateReferenceSet('dryer', 5, 31, { intervalS: 60 });
const ids = refs.map((b) => b.id);
// The default endpoint rule (moving-block SD, threshold 'auto') is calibrated at known endpoints:
// the stored batches have no lab values, so the model owner marks them (here at the simulated truth).
const marks = refs.map((b) => ({ batch: b.id, index: b.truth.endpointIndex! }));

beforeAll(async () => {
  ts = await startTestServer({}, { units: ['dryer-1'] });
  owner = await login(ts, 'model-owner', 'mona');
  const p = new Peer(ts.wsUrl, ts.token);
  await p.open();
  await p.hello('nir-1', 1, refs[0]!.axis);
  let seq = 0;
  for (const b of refs) {
    p.send({ type: 'batch-start', seq: seq++, t: b.start, unit: 'dryer-1', batch: b.id, product: 'granule A' });
    for (let i = 0; i < b.spectra.length; i++) p.sendFrame(seq++, b.times[i]!, b.spectra[i]!);
    p.send({ type: 'batch-end', seq: seq++, t: b.times[b.times.length - 1]! + 1, batch: b.id });
  }
  await p.waitAck(seq - 1, 60_000);
  p.close();
}, 120_000);
afterAll(async () => {
  await ts?.stop();
});

/** Resolves when the server's build worker has its data and is computing. */
function buildingStarted(): Promise<void> {
  return new Promise((resolve) => buildRunnerOf(ts.server.ctx).once('building', () => resolve()));
}

describe('model build in a worker thread', () => {
  let versionId = '';
  it('answers /healthz while the build computes; the stored model equals an in-process build byte for byte', async () => {
    const settings = { components: 3, referenceEndpoints: marks };
    const started = buildingStarted();
    let buildDone = false;
    const build = owner.post('/api/models/build', { name: 'dryer-w', product: 'granule A', referenceBatches: ids, settings }).finally(() => {
      buildDone = true;
    });
    await started;
    // The event loop is free: a request sent after the worker started computing is answered before the build ends.
    const health = await fetch(ts.server.url + '/healthz');
    expect(health.status).toBe(200);
    expect(buildDone).toBe(false);
    // So is a second build request: refused at once with a problem naming the running build (not queued).
    const second = await owner.post('/api/models/build', { name: 'dryer-x', product: 'granule A', referenceBatches: ids, settings });
    expect(buildDone).toBe(false);
    expect(second.status).toBe(409);
    expect(second.type).toContain('application/problem+json');
    expect(second.body).toMatchObject({ type: '/problems/model-build-busy', status: 409, title: 'Model build running' });
    expect(second.body.detail).toMatch(/"dryer-w" started by mona/);

    const r = await build;
    expect(r.status).toBe(201);
    expect(r.body).toMatchObject({ name: 'dryer-w', version: 1, status: 'draft', components: 3, referenceBatches: ids });
    versionId = r.body.versionId;
    const ctx = ts.server.ctx;
    const row = (await ctx.storage.getModelVersion(versionId))!;
    // The same build, in-process, from the same stored spectra and the settings the server passed.
    const batches = [];
    for (const id of ids) batches.push(await loadReferenceBatch(ctx, id));
    const stored = row.settings as { author: string; createdAt: number };
    const model = buildMonitoringModel(batches, { ...settings, name: 'dryer-w', product: 'granule A', author: stored.author, createdAt: stored.createdAt });
    const text = serializeMonitoringModel(model);
    expect(stored.author).toBe('mona');
    expect(row.sha256).toBe(model.sha256);
    const sha = (s: string) => createHash('sha256').update(s).digest('hex');
    expect(sha(row.body)).toBe(sha(text));
    expect(row.body).toBe(text);
    expect(row.components).toBe(model.pca.nComponents);
    expect(JSON.stringify(row.settings)).toBe(JSON.stringify(model.settings));
    // The same audit record as before the worker: model.build with the version's id and hash.
    const audit = await owner.get('/api/audit?action=model.build');
    expect(audit.status).toBe(200);
    expect(audit.body.items).toHaveLength(1);
    expect(audit.body.items[0]).toMatchObject({ user: 'mona', action: 'model.build', object: 'model:dryer-w@1' });
    expect(JSON.stringify(audit.body.items[0])).toContain(row.sha256);
    // The version is usable as before: its detail parses the stored file.
    const d = await owner.get(`/api/models/versions/${versionId}`);
    expect(d.status).toBe(200);
    expect(d.body.explained).toHaveLength(3);
  }, 120_000);

  it('bad settings: 422 problem naming the setting; the slot is free again', async () => {
    const r = await owner.post('/api/models/build', { name: 'dryer-w', product: 'granule A', referenceBatches: ids, settings: { components: 0 } });
    expect(r.status).toBe(422);
    expect(r.type).toContain('application/problem+json');
    expect(r.body.detail).toMatch(/the model could not be built: .*components/);
    expect(buildRunnerOf(ts.server.ctx).running()).toEqual([]);
  }, 120_000);

  it('a reference batch with too few spectra after exclusions: 422 naming the batch', async () => {
    const excludeSpectra = Array.from({ length: refs[1]!.spectra.length - 2 }, (_, i) => ({ batch: ids[1]!, index: i }));
    const r = await owner.post('/api/models/build', { name: 'dryer-w', product: 'granule A', referenceBatches: ids, settings: { components: 2, excludeSpectra, referenceEndpoints: marks } });
    expect(r.status).toBe(422);
    expect(r.body.detail).toContain(`reference batch "${ids[1]}" keeps only 2 spectra`);
  }, 120_000);

  it('a worker that dies mid-build: 500 problem saying so; the server goes on and builds again', async () => {
    const runner = buildRunnerOf(ts.server.ctx);
    const started = buildingStarted();
    const build = owner.post('/api/models/build', { name: 'dryer-w', product: 'granule A', referenceBatches: ids, settings: { components: 2, referenceEndpoints: marks } });
    await started;
    // The worker thread ends while computing (as after a fatal error in it): the request is answered, nothing is stored.
    await runner.stop();
    let r = await build;
    expect(r.status).toBe(500);
    expect(r.type).toContain('application/problem+json');
    expect(r.body).toMatchObject({ type: '/problems/model-build-failed', title: 'Model build failed', status: 500 });
    expect(r.body.detail).toMatch(/the model build worker stopped \(exit code \d+\) without giving a model/);
    expect((await fetch(ts.server.url + '/healthz')).status).toBe(200);
    expect(runner.running()).toEqual([]);
    expect((await owner.get('/api/models')).body.items.find((m: any) => m.name === 'dryer-w').versions).toHaveLength(1);
    r = await owner.post('/api/models/build', { name: 'dryer-w', product: 'granule A', referenceBatches: ids, settings: { components: 2, referenceEndpoints: marks } });
    expect(r.status).toBe(201);
    expect(r.body.version).toBe(2);
  }, 120_000);
  it('a build over its time limit is stopped: 500 problem saying so; the next build runs', async () => {
    const cfg = ts.server.ctx.config.modelBuild;
    const before = cfg.timeoutMs;
    cfg.timeoutMs = 1; // below the configurable minimum, so the worker cannot even load its code in time
    let r;
    try {
      r = await owner.post('/api/models/build', { name: 'dryer-w', product: 'granule A', referenceBatches: ids, settings: { components: 2, referenceEndpoints: marks } });
    } finally {
      cfg.timeoutMs = before;
    }
    expect(r.status).toBe(500);
    expect(r.body).toMatchObject({ type: '/problems/model-build-failed' });
    expect(r.body.detail).toMatch(/ran longer than 1 ms \(modelBuild.timeoutMs\) and was stopped/);
    expect(buildRunnerOf(ts.server.ctx).running()).toEqual([]);
    r = await owner.post('/api/models/build', { name: 'dryer-w', product: 'granule A', referenceBatches: ids, settings: { components: 2, referenceEndpoints: marks } });
    expect(r.status).toBe(201);
    expect(r.body.version).toBe(3);
  }, 120_000);
});
