import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateReferenceSet, simulateDryerBatch } from '../../simulators/batch.ts';
import { Peer, login, startTestServer, type Session, type TestServer, sqliteDb } from './helpers.ts';
import { execFileSync } from 'node:child_process';
import { parseMonitoringModel } from '../../core/model/monitoring-model.ts';
import { createBatchMonitor } from '../../core/monitor/batch-monitor.ts';
import { gridIndex } from '../../core/envelope/envelope.ts';

let ts: TestServer;
let admin: Session;
let viewer: Session;
const refs = simulateReferenceSet('dryer', 3, 21, { intervalS: 60 });

async function stream(p: Peer, firstSeq: number, unit: string, b: { id: string; start: number; times: number[]; spectra: Float32Array[] }, end = true): Promise<number> {
  let seq = firstSeq;
  p.send({ type: 'batch-start', seq: seq++, t: b.start, unit, batch: b.id, product: 'granule A' });
  for (let i = 0; i < b.spectra.length; i++) p.sendFrame(seq++, b.times[i]!, b.spectra[i]!);
  if (end) p.send({ type: 'batch-end', seq: seq++, t: b.times[b.times.length - 1]! + 1, batch: b.id });
  await p.waitAck(seq - 1, 60_000);
  return seq;
}

beforeAll(async () => {
  ts = await startTestServer({ ingest: { staleAfterMs: 400 }, metrics: { access: 'open' } }, { units: ['dryer-1', 'dryer-2'] });
  admin = await login(ts, 'administrator');
  viewer = await login(ts, 'viewer');
  const p = new Peer(ts.wsUrl, ts.token);
  await p.open();
  await p.hello('nir-1', 1, refs[0]!.axis);
  let seq = 0;
  for (const b of refs) seq = await stream(p, seq, 'dryer-1', b);
  p.close();
}, 120_000);
afterAll(async () => {
  await ts?.stop();
});

describe('REST: problem details and validation', () => {
  it('unknown route, bad path, bad query and bad body are RFC 9457 problems naming the field', async () => {
    let r = await viewer.get('/api/nothing-here');
    expect(r.status).toBe(404);
    expect(r.type).toContain('application/problem+json');
    expect(r.body).toMatchObject({ type: '/problems/not-found', status: 404, title: 'Not found' });
    r = await viewer.get('/api/batches/does-not-exist');
    expect(r.status).toBe(404);
    expect(r.body.detail).toMatch(/batch "does-not-exist" does not exist/);
    r = await viewer.get('/api/batches?limit=-4');
    expect(r.status).toBe(400);
    expect(r.body.errors[0].path).toBe('query.limit');
    r = await viewer.get(`/api/batches/${refs[0]!.id}/results?fromSeq=9&toSeq=3`);
    expect(r.status).toBe(400);
    expect(r.body.detail).toMatch(/fromSeq must not be greater than toSeq/);
    r = await admin.post('/api/units', { id: 'bad id with spaces' });
    expect(r.status).toBe(400);
    expect(r.body.errors[0]).toMatchObject({ path: 'body.id' });
    r = await admin.post('/api/units', '{"id": ');
    expect(r.status).toBe(400);
    expect(r.body.type).toBe('/problems/invalid-json');
    r = await admin.post('/api/units', { id: 'u-x', extra: 1 });
    expect(r.status).toBe(400);
    expect(r.body.detail).toMatch(/extra/);
  });
  it('roles: a viewer may read but not create', async () => {
    const r = await viewer.post('/api/units', { id: 'dryer-9' });
    expect(r.status).toBe(403);
    const anon = await fetch(ts.server.url + '/api/units');
    expect(anon.status).toBe(401);
  });
});

describe('REST: units, analyzers, batches', () => {
  it('creates a unit and an analyzer (token shown once, works for ingest)', async () => {
    let r = await admin.post('/api/units', { id: 'reactor-1', kind: 'reactor', name: 'Reactor 1' });
    expect(r.status).toBe(201);
    expect(r.body).toMatchObject({ id: 'reactor-1', kind: 'reactor', status: 'idle', openBatch: null });
    r = await admin.post('/api/units', { id: 'reactor-1' });
    expect(r.status).toBe(409);
    r = await admin.post('/api/analyzers', { id: 'nir-9' });
    expect(r.status).toBe(201);
    const p = new Peer(ts.wsUrl, r.body.token);
    await p.open();
    expect((await p.hello('nir-9', 5, [1100, 1102, 1104])).type).toBe('welcome');
    p.close();
    r = await viewer.get('/api/analyzers');
    expect(r.body.items.map((a: any) => a.id)).toEqual(['nir-1', 'nir-9']);
    expect(r.body.items[0]).toMatchObject({ id: 'nir-1', axisPoints: refs[0]!.axis.length, boot: 1 });
  });
  it('lists and filters batches; detail, spectra and results by range; CSV', async () => {
    let r = await viewer.get('/api/batches?unit=dryer-1&status=ended');
    expect(r.body.total).toBe(3);
    expect(r.body.items.map((b: any) => b.id).sort()).toEqual(refs.map((b) => b.id).sort());
    r = await viewer.get('/api/batches?unit=dryer-2');
    expect(r.body.total).toBe(0);
    const b0 = refs[0]!;
    r = await viewer.get(`/api/batches/${b0.id}`);
    expect(r.body).toMatchObject({ id: b0.id, status: 'ended', spectrumCount: b0.spectra.length, firstSeq: 1, model: null });
    expect(r.body.axis).toEqual(b0.axis);
    r = await viewer.get(`/api/batches/${b0.id}/spectra?fromSeq=3&toSeq=7&limit=2`);
    expect(r.body.items.map((s: any) => s.seq)).toEqual([3, 4]);
    expect(r.body.nextSeq).toBe(5);
    expect(r.body.items[0].values).toEqual(Array.from(b0.spectra[2]!));
    r = await viewer.get(`/api/batches/${b0.id}/export.csv`);
    expect(r.type).toContain('text/csv');
    const lines = (r.body as string).trim().split('\r\n');
    expect(lines.length).toBe(b0.spectra.length + 1);
    expect(lines[0]!.split(',').length).toBe(3 + b0.axis.length);
    expect(lines[1]!.split(',')[0]).toBe('1');
  });
});

describe('REST: models — build, evaluate, approve (signature), deploy, retire', () => {
  let versionId = '';
  it('builds a draft from reference batches', async () => {
    let r = await admin.post('/api/models/build', { name: 'dryer-a', product: 'granule A', referenceBatches: [refs[0]!.id] });
    expect(r.status).toBe(400);
    expect(r.body.errors[0].message).toMatch(/at least 2/);
    r = await admin.post('/api/models/build', { name: 'dryer-a', product: 'granule A', referenceBatches: [refs[0]!.id, 'nope'] });
    expect(r.status).toBe(404);
    r = await admin.post('/api/models/build', { name: 'dryer-a', product: 'granule A', referenceBatches: refs.map((b) => b.id), settings: { components: 0 } });
    expect(r.status).toBe(422);
    expect(r.body.detail).toMatch(/components/);
    // no lab values stored and no marks: the default rule's auto threshold has no endpoint to calibrate at
    r = await admin.post('/api/models/build', { name: 'dryer-a', product: 'granule A', referenceBatches: refs.map((b) => b.id), settings: { components: 2 } });
    expect(r.status).toBe(422);
    expect(r.body.detail).toContain(`3 reference batches have none: "${refs[0]!.id}" (no property target to read lab values against)`);
    expect(r.body.detail).toMatch(/settings\.referenceEndpoints/);
    // a mark naming a batch that is not a reference batch is refused by name
    r = await admin.post('/api/models/build', { name: 'dryer-a', product: 'granule A', referenceBatches: refs.map((b) => b.id), settings: { components: 2, referenceEndpoints: [{ batch: 'elsewhere', elapsedMin: 30 }] } });
    expect(r.status).toBe(422);
    expect(r.body.detail).toMatch(/referenceEndpoints names batch "elsewhere"/);
    // the model owner marks them: by minutes, by spectrum, and one as its last spectrum (said explicitly)
    const marks = [
      { batch: refs[0]!.id, elapsedMin: (refs[0]!.times[refs[0]!.truth.endpointIndex!]! - refs[0]!.times[0]!) / 60000 },
      { batch: refs[1]!.id, index: refs[1]!.truth.endpointIndex! },
      { batch: refs[2]!.id, last: true, note: 'stopped at the endpoint' },
    ];
    r = await admin.post('/api/models/build', { name: 'dryer-a', product: 'granule A', referenceBatches: refs.map((b) => b.id), settings: { components: 2, referenceEndpoints: marks } });
    expect(r.status).toBe(201);
    expect(r.body).toMatchObject({ name: 'dryer-a', version: 1, status: 'draft', components: 2, referenceBatches: refs.map((b) => b.id) });
    expect(r.body.sha256).toMatch(/^[0-9a-f]{64}$/);
    versionId = r.body.versionId;
    r = await viewer.get(`/api/models/versions/${versionId}`);
    expect(r.body.explained.length).toBe(2);
    // the evidence: the rule with its resolved threshold and how, the marked endpoints, the check table
    expect(r.body.endpoint.criteria[0]).toMatchObject({ kind: 'mbsd' });
    expect(r.body.endpoint.criteria[0].method).toMatch(/^'auto': the smallest MBSD over the 5 spectra up to the known endpoint among 3 reference batches/);
    expect(r.body.endpoint.caution).toMatch(/Tideline advises/);
    expect(r.body.property).toBeNull();
    expect(r.body.referenceEndpoints.map((e: any) => e.source)).toEqual(['marked', 'marked', 'marked-last']);
    expect(r.body.referenceEndpoints[2].detail).toMatch(/stopped at the endpoint$/);
    expect(r.body.endpointCheck.rows.map((x: any) => x.batch)).toEqual(refs.map((b) => b.id));
    expect(r.body.endpointCheck.method).toMatch(/^leave-one-batch-out/);
    expect(r.body.limits.t2).toBeGreaterThan(0);
    r = await viewer.get(`/api/models/versions/${versionId}/envelope`);
    expect(r.body.scores.length).toBe(2);
    expect(r.body.scores[0].expected.length).toBe(r.body.progress.length);
    // the reference batches' paths, replayed through this version: one per stored reference batch,
    // progress never falling (time or a running-maximum indicator), 2 scores per point
    expect(r.body.references).toEqual([]); // the envelope answers at once; the paths come from /references
    const rr = await viewer.get(`/api/models/versions/${versionId}/references`);
    expect(rr.body.versionId).toBe(versionId);
    const refsView = rr.body.references as { batch: string; progress: number[]; scores: number[][] }[];
    const detail = (await viewer.get(`/api/models/versions/${versionId}`)).body;
    expect(refsView.map((x) => x.batch).sort()).toEqual([...detail.referenceBatches].sort());
    for (const x of refsView) {
      expect(x.progress.length).toBeGreaterThan(1);
      expect(x.progress.length).toBeLessThanOrEqual(200);
      expect(x.scores.length).toBe(x.progress.length);
      expect(x.scores.every((p) => p.length === 2 && p.every(Number.isFinite))).toBe(true);
      for (let i = 1; i < x.progress.length; i++) expect(x.progress[i]!).toBeGreaterThanOrEqual(x.progress[i - 1]!);
    }
  }, 120_000);
  it('evaluates on chosen batches', async () => {
    const r = await admin.post(`/api/models/versions/${versionId}/evaluate`, { batches: [refs[1]!.id] });
    expect(r.status).toBe(200);
    expect(r.body.batches[0]).toMatchObject({ batch: refs[1]!.id, spectra: refs[1]!.spectra.length });
  }, 120_000);
  it('deploy needs approval; approval needs the password; then deploy and retire', async () => {
    let r = await admin.post('/api/deployments', { unit: 'dryer-2', versionId });
    expect(r.status).toBe(409);
    expect(r.body.detail).toMatch(/only an approved version/);
    r = await admin.post(`/api/models/versions/${versionId}/approve`, { reason: 'checked', password: 'wrong' });
    expect(r.status).toBe(401);
    expect(r.body.detail).toMatch(/password/);
    r = await admin.post(`/api/models/versions/${versionId}/approve`, { reason: 'checked on 3 batches', password: 'correct horse battery staple 42' });
    expect(r.status).toBe(200);
    expect(r.body).toMatchObject({ status: 'approved', approvedBy: 'u-administrator', approvalReason: 'checked on 3 batches' });
    r = await admin.post('/api/deployments', { unit: 'dryer-2', versionId, reason: 'go live' });
    expect(r.status).toBe(201);
    expect(r.body).toMatchObject({ unit: 'dryer-2', active: true, model: { versionId, name: 'dryer-a', version: 1 } });
    r = await viewer.get('/api/units/dryer-2');
    expect(r.body.deployment).toMatchObject({ versionId });
    // A batch started now is judged by it.
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    await p.hello('nir-1', 2, refs[0]!.axis);
    const b = simulateDryerBatch({ seed: 8, id: 'judged-1', intervalS: 60 });
    await stream(p, 0, 'dryer-2', b);
    p.close();
    r = await viewer.get('/api/batches/judged-1/results?limit=5');
    expect(r.body.items.length).toBe(5);
    expect(r.body.model.versionId).toBe(versionId);
    expect(r.body.items[0]).toHaveProperty('t2');
    r = await viewer.get('/api/batches/judged-1/contributions?seq=3');
    expect(r.status).toBe(200);
    expect(r.body.contributions.q.length).toBe(r.body.contributions.axis.length);
    r = await viewer.get('/api/batches/judged-1/export.csv?what=results');
    expect((r.body as string).split('\r\n')[0]).toMatch(/^seq,t_ms,time_utc,elapsed_min,progress,t2/);
    r = await viewer.get('/api/batches/judged-1/spectrum-view?seq=3');
    expect(r.status, JSON.stringify(r.body).slice(0, 300)).toBe(200);
    expect(r.body.raw.values).toEqual(Array.from(b.spectra[2]!));
    expect(r.body.preprocessed.values.length).toBe(r.body.preprocessed.axis.length);
    await expectGoldenBand(r.body, versionId);
    r = await viewer.get(`/api/models/versions/${versionId}/calibration`);
    expect(r.status, JSON.stringify(r.body).slice(0, 300)).toBe(200);
    expect(r.body.loadings.length).toBe(2);
    expect(r.body.loadings[0].length).toBe(r.body.modelAxis.length);
    expect(r.body.samples.length).toBeGreaterThan(10);
    r = await admin.post(`/api/models/versions/${versionId}/retire`, { reason: 'superseded', password: 'correct horse battery staple 42' });
    expect(r.body).toMatchObject({ status: 'retired', deployedTo: [] });
    r = await viewer.get('/api/units/dryer-2');
    expect(r.body.deployment).toBeNull();
  }, 120_000);
});

describe('REST: alarms — stale data, acknowledge, shelve', () => {
  it('an analyzer silent during a batch raises a stale alarm; acknowledge and shelve it; data clears it', async () => {
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    await p.hello('nir-1', 3, refs[0]!.axis);
    const b = refs[2]!;
    p.send({ type: 'batch-start', seq: 0, t: b.start, unit: 'dryer-1', batch: 'stale-1', product: 'granule A' });
    p.sendFrame(1, b.times[0]!, b.spectra[0]!);
    await p.waitAck(1);
    let alarm: any;
    for (let i = 0; i < 100 && !alarm; i++) {
      await new Promise((r) => setTimeout(r, 50));
      alarm = (await viewer.get('/api/alarms?unit=dryer-1&open=true')).body.items.find((a: any) => a.kind === 'stale');
    }
    expect(alarm).toMatchObject({ kind: 'stale', state: 'active-unacknowledged', batch: 'stale-1', active: true });
    expect(alarm.message).toMatch(/no data from analyzer nir-1/);
    expect((await viewer.get('/api/units/dryer-1')).body.status).toBe('stale');
    // The alarm change went into the outbox for the signal channels.
    const rows = sqliteDb(ts.server.ctx.storage).prepare(`SELECT type, payload FROM outbox WHERE unit = 'dryer-1' AND type = 'alarm'`).all() as { payload: string }[];
    expect(rows.some((r) => JSON.parse(r.payload).alarm.id === alarm.id)).toBe(true);
    const operator = await login(ts, 'operator');
    let r = await viewer.post(`/api/alarms/${alarm.id}/acknowledge`, {});
    expect(r.status).toBe(403);
    r = await operator.post(`/api/alarms/not-a-uuid/acknowledge`, {});
    expect(r.status).toBe(400);
    r = await operator.post(`/api/alarms/${alarm.id}/acknowledge`, { comment: 'checking the probe' });
    expect(r.body).toMatchObject({ state: 'active-acknowledged', acknowledgedBy: 'u-operator', acknowledgeComment: 'checking the probe' });
    r = await operator.post(`/api/alarms/${alarm.id}/acknowledge`, {});
    expect(r.status).toBe(409);
    expect(r.body.detail).toMatch(/nothing to acknowledge/);
    r = await operator.post(`/api/alarms/${alarm.id}/shelve`, { minutes: 0, reason: 'x' });
    expect(r.status).toBe(400);
    expect(r.body.errors[0]).toMatchObject({ path: 'body.minutes' });
    r = await operator.post(`/api/alarms/${alarm.id}/shelve`, { minutes: 30, reason: 'probe being cleaned' });
    expect(r.body.shelvedUntil).toBeGreaterThan(Date.now() + 29 * 60_000);
    // Data again: the condition clears; acknowledged + cleared → normal (ISA-18.2).
    p.sendFrame(2, b.times[1]!, b.spectra[1]!);
    await p.waitAck(2);
    r = await viewer.get(`/api/alarms?batch=stale-1`);
    expect(r.body.items[0]).toMatchObject({ id: alarm.id, state: 'normal', active: false });
    p.close();
  }, 60_000);
});

describe('OpenAPI and metrics', () => {
  it('serves an OpenAPI document listing every route', async () => {
    const r = await viewer.get('/api/openapi.json');
    expect(r.body.openapi).toBe('3.1.0');
    for (const path of ['/api/units', '/api/batches/{batch}/results', '/api/models/build', '/api/alarms/{alarm}/shelve']) expect(r.body.paths).toHaveProperty([path]);
    expect(r.body.paths['/api/batches']['get'].parameters.map((p: any) => p.name)).toContain('unit');
  });
  it('serves Prometheus metrics', async () => {
    const r = await fetch(ts.server.url + '/metrics');
    const text = await r.text();
    expect(text).toMatch(/tideline_ingest_spectra_total \d+/);
    expect(text).toMatch(/tideline_ingest_ack_latency_seconds_bucket/);
    expect(text).toMatch(/tideline_ingest_connections/);
    expect(text).toMatch(/tideline_alarms_active\{state="active-unacknowledged"\}/);
  });
});

/**
 * The spectrum view's golden band: the reference batches replayed here through the version's
 * model, their spectra within ±max(1, smoothing) grid points of the spectrum's progress averaged per
 * batch, then mean and sd between batches by numpy (ddof = 1) times the envelope's k.
 */
async function expectGoldenBand(view: any, versionId: string): Promise<void> {
  const g = view.golden;
  expect(g, JSON.stringify(g)).toMatchObject({ versionId, batches: refs.length });
  const file = await viewer.get(`/api/models/versions/${versionId}/model.json`);
  const model = parseMonitoringModel(JSON.stringify(file.body));
  const env = model.envelope;
  const k = gridIndex(env, g.progress);
  const half = Math.max(1, env.smoothing);
  const perBatch: { raw: number[][]; pre: number[][] }[] = refs.map((b) => {
    const mon = createBatchMonitor(model, b.times[0]!);
    const raw: number[][] = [];
    b.spectra.forEach((sp, i) => {
      const r = mon.push(i, b.times[i]!, sp);
      if (Math.abs(gridIndex(env, r.progress) - k) <= half) raw.push(Array.from(sp));
    });
    return { raw, pre: raw.map((x) => Array.from(model.chain.apply(x))) };
  });
  expect(g.spectra).toBe(perBatch.reduce((n, b) => n + b.raw.length, 0));
  const py = `
import json, sys, numpy as np
d = json.load(sys.stdin)
out = {}
for key in ('raw', 'pre'):
    m = np.array([np.mean(np.array(b[key]), axis=0) for b in d['batches']])
    out[key] = {'mean': m.mean(axis=0).tolist(), 'sd': m.std(axis=0, ddof=1).tolist()}
print(json.dumps(out))`;
  const want = JSON.parse(execFileSync('python3', ['-c', py], { input: JSON.stringify({ batches: perBatch }) }).toString());
  for (const [key, part] of [['raw', view.raw], ['pre', view.preprocessed]] as const) {
    const w = want[key] as { mean: number[]; sd: number[] };
    expect(part.goldenMean.length).toBe(part.axis.length);
    for (let j = 0; j < part.axis.length; j += 17) {
      expect(part.goldenMean[j]).toBeCloseTo(w.mean[j]!, 9);
      expect(part.goldenUpper[j]).toBeCloseTo(w.mean[j]! + env.k * w.sd[j]!, 9);
      expect(part.goldenLower[j]).toBeCloseTo(w.mean[j]! - env.k * w.sd[j]!, 9);
    }
  }
}
