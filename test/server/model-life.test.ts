/**
 * Shadow runs and model health through the public paths: a real server, simulated dryer batches
 * streamed over /ingest, REST with sessions and an electronic signature. The candidate's figures in
 * the comparison are checked against core's batch monitor replaying the stored spectra on its own;
 * the health's rate test (one-sided Fisher exact test on batches) against scipy.stats.fisher_exact run
 * through python3.
 */
import { execFileSync } from 'node:child_process';
import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch, simulateReferenceSet } from '../../simulators/batch.ts';
import { createBatchMonitor } from '../../core/monitor/batch-monitor.ts';
import type { MonitoringModel } from '../../core/model/monitoring-model.ts';
import { buildSmallDryerModel, installModel } from './model-fixture.ts';
import { Peer, login, startTestServer, type Session, type TestServer } from './helpers.ts';

const PASSWORD = 'correct horse battery staple 42';
const DAY = 86_400_000;
const METRICS_TOKEN = 'metrics-token-for-the-model-life-test-0123';
let ts: TestServer;
let owner: Session;
let viewer: Session;
let deployedId: string;
let candidateId: string;
let candidate: MonitoringModel;
let clockOffset = 0;
let peer: Peer;
let seq = 0;
const batches: string[] = [];

async function stream(k: number, faults: Parameters<typeof simulateDryerBatch>[0]['faults'] = []) {
  const b = simulateDryerBatch({ seed: 70 + k, id: `life-${k}`, intervalS: 60, faults });
  const shift = (k + 1) * DAY;
  if (seq === 0) await peer.hello('nir-1', 1, b.axis);
  peer.send({ type: 'batch-start', seq: seq++, t: b.start + shift, unit: 'dryer-1', batch: b.id, product: 'granule A' });
  for (let i = 0; i < b.spectra.length; i++) peer.sendFrame(seq++, b.times[i]! + shift, Float32Array.from(b.spectra[i]!));
  peer.send({ type: 'batch-end', seq: seq++, t: b.times[b.times.length - 1]! + shift + 1, batch: b.id, reason: 'discharged' });
  await peer.waitAck(seq - 1, 60_000);
  batches.push(b.id);
  return { ...b, shift };
}

/**
 * The same session, retrying once when a request meets a kept-alive socket the server closed while
 * the test computed (ECONNRESET before any answer: the server never saw the request).
 */
function resilient(s: Session): Session {
  const once = async <T>(f: () => Promise<T>): Promise<T> => {
    try {
      return await f();
    } catch (e) {
      if ((e as { cause?: { code?: string } }).cause?.code !== 'ECONNRESET') throw e;
      return f();
    }
  };
  return { ...s, get: (p) => once(() => s.get(p)), post: (p, b) => once(() => s.post(p, b)) };
}

beforeAll(async () => {
  ts = await startTestServer({ metrics: { access: 'token', token: METRICS_TOKEN } }, { units: ['dryer-1'], now: () => Date.now() + clockOffset });
  owner = resilient(await login(ts, 'model-owner'));
  viewer = resilient(await login(ts, 'viewer'));
  const st = ts.server.ctx.storage;
  const a = buildSmallDryerModel(11);
  // The deployed version's reference batches, stored as a site has them (streamed before any
  // deployment, so unjudged): the drift chart's baseline is their batch-mean scores.
  peer = new Peer(ts.wsUrl, ts.token);
  await peer.open();
  for (const ref of simulateReferenceSet('dryer', 4, 11, { intervalS: 60 })) {
    if (seq === 0) await peer.hello('nir-1', 1, ref.axis);
    peer.send({ type: 'batch-start', seq: seq++, t: ref.start, unit: 'dryer-1', batch: ref.id, product: 'granule A' });
    for (let i = 0; i < ref.spectra.length; i++) peer.sendFrame(seq++, ref.times[i]!, Float32Array.from(ref.spectra[i]!));
    peer.send({ type: 'batch-end', seq: seq++, t: ref.times[ref.times.length - 1]! + 1, batch: ref.id, reason: 'discharged' });
  }
  await peer.waitAck(seq - 1, 60_000);
  deployedId = await installModel(st, a.text, a.model, 'dryer-1');
  await ts.server.ctx.ingest.refreshDeployment('dryer-1');
  // The candidate: built from other reference batches (another seed), a draft until approved over REST.
  const b = buildSmallDryerModel(12);
  candidate = b.model;
  candidateId = randomUUID();
  await st.insertModelVersion({
    id: candidateId, name: b.model.settings.name, version: await st.nextModelVersion(b.model.settings.name), product: b.model.settings.product, sha256: b.model.sha256,
    body: b.text, settings: b.model.settings as unknown as Record<string, unknown>, referenceBatches: b.model.meta.batches.map((x) => x.id),
    components: b.model.pca.nComponents, confidence: b.model.settings.confidence, status: 'draft', createdAt: 0, createdBy: 'test',
    approvedAt: null, approvedBy: null, approvalReason: null, retiredAt: null, retiredBy: null, retireReason: null,
  });
}, 120_000);

afterAll(async () => {
  peer?.close();
  await ts?.stop();
});

describe('shadow run', () => {
  let runId: string;

  it('starts through REST (role-guarded, audited, one per unit, never the deployed version)', async () => {
    let r = await viewer.post('/api/shadow-runs', { unit: 'dryer-1', versionId: candidateId, reason: 'try v2' });
    expect(r.status).toBe(403);
    r = await owner.post('/api/shadow-runs', { unit: 'dryer-1', versionId: deployedId, reason: 'same' });
    expect(r.status).toBe(409);
    r = await owner.post('/api/shadow-runs', { unit: 'dryer-1', versionId: candidateId });
    expect(r.status).toBe(400);
    expect(JSON.stringify(r.body)).toMatch(/reason/);
    r = await owner.post('/api/shadow-runs', { unit: 'dryer-1', versionId: candidateId, reason: 'prove v2 on live batches' });
    expect(r.status).toBe(201);
    runId = r.body.id;
    expect(r.body.deployedVersionId).toBe(deployedId);
    r = await owner.post('/api/shadow-runs', { unit: 'dryer-1', versionId: candidateId, reason: 'again' });
    expect(r.status).toBe(409);
    const audit = await owner.get('/api/audit?action=shadow.start&order=desc&limit=1');
    expect(JSON.parse(audit.body.items[0].after).run).toBe(runId);
  });

  it('judges the same live spectra apart, never annunciating, and the comparison agrees with an independent replay', async () => {
    await stream(0);
    const faulty = await stream(1, [{ type: 'wrong-material', onsetS: 0 }]);
    await stream(2);
    // A lab value attached after the batch (REST), compared with both predictions.
    const lab = await owner.post(`/api/batches/${faulty.id}/lab-values`, { property: 'moisture', value: faulty.truth.property.values[20]!, unit: '% w/w', sampleT: faulty.times[20]! + faulty.shift });
    expect(lab.status, JSON.stringify(lab.body)).toBe(201);
    const r = await viewer.get(`/api/shadow-runs/${runId}/comparison`);
    expect(r.status).toBe(200);
    const c = r.body;
    expect(c.batches.map((b: { batch: string }) => b.batch)).toEqual(batches);
    for (const b of c.batches) {
      const sim = simulateDryerBatch({ seed: 70 + batches.indexOf(b.batch), id: b.batch, intervalS: 60, faults: b.batch === faulty.id ? [{ type: 'wrong-material', onsetS: 0 }] : [] });
      const shift = (batches.indexOf(b.batch) + 1) * DAY;
      // The candidate's own figures, replayed by core from the simulator's spectra (float32, as sent).
      const mon = createBatchMonitor(candidate, sim.start + shift);
      let alarms = 0;
      let doneAt: number | null = null;
      const keys = new Set<string>();
      sim.spectra.forEach((s, i) => {
        const res = mon.push(i, sim.times[i]! + shift, Float32Array.from(s));
        for (const ch of res.conditionChanges) if (ch.active) (alarms++, keys.add(ch.key));
        for (const e of res.events) if (e.type === 'endpoint-state' && e.to === 'done' && doneAt === null) doneAt = e.t;
      });
      expect(b.candidate.spectra).toBe(sim.spectra.length);
      expect(b.deployed.spectra).toBe(sim.spectra.length);
      expect(b.candidate.alarms).toBe(alarms);
      expect(b.candidate.conditions).toEqual([...keys].sort());
      expect(b.candidate.endpointAt).toBe(doneAt);
      if (b.deployed.endpointAt !== null && doneAt !== null) expect(b.endpointDifferenceMin).toBeCloseTo((doneAt - b.deployed.endpointAt) / 60_000, 9);
      // Never annunciated: the unit's alarms for the batch are the deployed version's conditions only.
      const al = await viewer.get(`/api/alarms?batch=${b.batch}&limit=200`);
      for (const a of al.body.items) expect(b.deployed.conditions).toContain(a.key);
      for (const k of b.onlyCandidate) expect(al.body.items.some((a: { key: string }) => a.key === k)).toBe(false);
    }
    const fb = c.batches.find((b: { batch: string }) => b.batch === faulty.id);
    expect(fb.deployed.alarms + fb.candidate.alarms).toBeGreaterThan(0);
    expect(fb.candidate.lab?.n ?? fb.deployed.lab?.n).toBe(1);
    expect(c.summary.batches).toBe(3);
    expect(c.summary.text.length).toBeGreaterThan(0);
  }, 180_000);

  it('promotes the candidate with a signed deploy carrying the comparison', async () => {
    let r = await owner.post(`/api/shadow-runs/${runId}/promote`, { reason: 'fewer alarms', password: PASSWORD });
    expect(r.status, JSON.stringify(r.body)).toBe(409); // still a draft
    r = await owner.post(`/api/models/versions/${candidateId}/approve`, { reason: 'shadow run fine', password: PASSWORD, reviewIntervalDays: 180 });
    if (r.status === 422 && r.body.type.endsWith('early-endpoint')) r = await owner.post(`/api/models/versions/${candidateId}/approve`, { reason: 'shadow run fine', password: PASSWORD, reviewIntervalDays: 180, earlyEndpointOverride: 'seen in shadow' });
    expect(r.status).toBe(200);
    r = await owner.post(`/api/shadow-runs/${runId}/promote`, { reason: 'fewer alarms', password: 'wrong password' });
    expect(r.status).toBe(401);
    expect(ts.server.ctx.ingest.deploymentRef('dryer-1')!.versionId).toBe(deployedId);
    r = await owner.post(`/api/shadow-runs/${runId}/promote`, { reason: 'fewer alarms on the same batches', password: PASSWORD });
    expect(r.status).toBe(200);
    expect(r.body.modelVersion ?? r.body.model?.versionId ?? r.body.versionId).toBeDefined();
    expect(ts.server.ctx.ingest.deploymentRef('dryer-1')!.versionId).toBe(candidateId);
    const sig = await owner.get('/api/audit?action=signature.deployed&order=desc&limit=1');
    expect(sig.body.items).toHaveLength(1);
    const after = JSON.parse(sig.body.items[0].after);
    expect(after.evidence.shadowComparison.batches).toBe(3);
    const run = (await viewer.get(`/api/shadow-runs?unit=dryer-1`)).body.items[0];
    expect(run.endedAt).not.toBeNull();
    expect(run.endReason).toMatch(/^promoted/);
  });
});

describe('model health', () => {
  it('reports the deployed version over its batches; the rate tests agree with scipy', async () => {
    const r = await viewer.get(`/api/models/versions/${deployedId}/health`);
    expect(r.status).toBe(200);
    const h = r.body;
    expect(h.batches.map((b: { id: string }) => b.id)).toEqual(batches);
    // Counted as the monitor judges: spectra after the start-up minutes, fewer than those judged.
    expect(h.t2.points).toBe(h.batches.reduce((a: number, b: { points: number }) => a + b.points, 0));
    expect(h.t2.points).toBeLessThan(h.batches.reduce((a: number, b: { spectra: number }) => a + b.spectra, 0));
    expect(h.t2.startupMin).toBeGreaterThan(0);
    // The fixture's model file carries its reference figures (built now): the baseline is its reference batches.
    expect(h.q.batches.baseline.source).toBe('reference');
    const fisher = (r: { batches: { left: number; of: number; baseline: { left: number; of: number } } }) => `stats.fisher_exact([[${r.batches.left}, ${r.batches.of - r.batches.left}], [${r.batches.baseline.left}, ${r.batches.baseline.of - r.batches.baseline.left}]], alternative='greater').pvalue`;
    const py = `from scipy import stats\nprint(${fisher(h.t2)}, ${fisher(h.q)})`;
    const [p2, pq] = execFileSync('python3', ['-c', py]).toString().trim().split(/\s+/).map(Number);
    expect(h.t2.batches.test.pValue).toBeCloseTo(p2!, 9);
    expect(h.q.batches.test.pValue).toBeCloseTo(pq!, 9);
    expect(h.drift.charts.length).toBeGreaterThan(0);
    expect(h.drift.baselineBatches).toBe(4);
    expect(h.drift.charts[0].ewma).toHaveLength(3);
    expect(h.tests.map((t: { code: string }) => t.code)).toEqual(['alarm-rate', 't2-rate', 'q-rate', 'drift', 'bias', 'review']);
  });

  it('sets the review due date at approval; once overdue the health alarm (low priority) and /metrics say so', async () => {
    const v = (await viewer.get(`/api/models/versions/${candidateId}`)).body;
    let h = (await viewer.get(`/api/models/versions/${candidateId}/health`)).body;
    expect(h.review.intervalDays).toBe(180);
    expect(h.review.dueAt).toBe(v.approvedAt + 180 * DAY);
    expect(h.review.overdue).toBe(false);
    clockOffset = 200 * DAY;
    viewer = resilient(await login(ts, 'viewer')); // the session has expired on the server's clock
    await stream(3); // judged by the promoted candidate; its end refreshes the unit's health
    h = (await viewer.get(`/api/models/versions/${candidateId}/health`)).body;
    expect(h.review.overdue).toBe(true);
    expect(h.failed).toBe(true);
    let alarm: { kind: string; priority: number; state: string; message: string; value: number | null; limit: number | null } | undefined;
    for (let i = 0; i < 100 && !alarm; i++) {
      alarm = (await viewer.get('/api/alarms?unit=dryer-1&limit=200')).body.items.find((a: { kind: string }) => a.kind === 'model-health');
      if (!alarm) await new Promise((res) => setTimeout(res, 100));
    }
    expect(alarm).toBeDefined();
    expect(alarm!.priority).toBe(4);
    expect(alarm!.state).toBe('active-unacknowledged');
    expect(alarm!.message).toMatch(/review/);
    // The alarm's value and limit are those of the first failing test, in its own unit (not a count
    // of failing tests against 0); the review test's: days since approval against the interval.
    const first = h.tests.find((t: { failed: boolean; limit?: number | null }) => t.failed && t.limit != null);
    // The review's figure (days since approval) grows with the clock between the batch end that
    // raised the alarm and this read: equal to about a minute (1e-3 days), not to the last digit.
    expect(alarm!.value).toBeCloseTo(first.value, first.code === 'review' ? 3 : 9);
    expect(alarm!.limit).toBeCloseTo(first.limit, 9);
    expect(alarm!.message).toContain(first.code);
    const review = h.tests.find((t: { code: string }) => t.code === 'review');
    expect(review.value).toBeGreaterThan(180);
    expect(review.limit).toBe(180);
    expect(review.unit).toBe('days since approval');
    const metrics = await (await fetch(ts.server.url + '/metrics', { headers: { connection: 'close', authorization: `Bearer ${METRICS_TOKEN}` } })).text();
    expect(metrics).toMatch(/tideline_model_health_failed\{unit="dryer-1",model="dryer-test",version="2"\} [1-9]/);
    expect(metrics).toMatch(/tideline_model_health_review_due_seconds\{unit="dryer-1",model="dryer-test",version="2"\} -/);
    // The rates as judged: nominal of the alarm limits, and the share of the window's batches that left them.
    expect(metrics).toMatch(new RegExp(`tideline_model_health_nominal_ratio\\{unit="dryer-1",model="dryer-test",version="2"\\} ${h.t2.nominal}`));
    expect(metrics).toMatch(new RegExp(`tideline_model_health_q_batches_left_ratio\\{unit="dryer-1",model="dryer-test",version="2"\\} ${h.q.batches.share}`));
  }, 120_000);
});
