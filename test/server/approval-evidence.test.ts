/**
 * Approval shows its evidence and refuses a version whose point rates on held-out good batches are
 * far above nominal unless a signed override gives the reason — through REST with a real server
 * and a real model. The exact binomial interval is checked against scipy (binomtest(...).
 * proportion_ci(method='exact'), Clopper & Pearson 1934) run through python3.
 */
import { execFileSync } from 'node:child_process';
import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch } from '../../simulators/batch.ts';
import { clopperPearson } from '../../core/evaluate/approval-evidence.ts';
import { buildSmallDryerModel } from './model-fixture.ts';
import { Peer, login, startTestServer, type Session, type TestServer } from './helpers.ts';

let ts: TestServer;
let owner: Session;
let versionId: string;
const PASSWORD = 'correct horse battery staple 42';

beforeAll(async () => {
  ts = await startTestServer({}, { units: ['dryer-1'] });
  owner = await login(ts, 'model-owner');
  const { model, text } = buildSmallDryerModel(11);
  const st = ts.server.ctx.storage;
  versionId = randomUUID();
  await st.insertModelVersion({
    id: versionId, name: model.settings.name, version: await st.nextModelVersion(model.settings.name), product: model.settings.product, sha256: model.sha256,
    body: text, settings: model.settings as unknown as Record<string, unknown>, referenceBatches: model.meta.batches.map((b) => b.id),
    components: model.pca.nComponents, confidence: model.settings.confidence, status: 'draft', createdAt: 0, createdBy: 'test',
    approvedAt: null, approvedBy: null, approvalReason: null, retiredAt: null, retiredBy: null, retireReason: null,
  });
  // Three "good" batches whose spectra sit off the model (a shifted baseline from the start): a
  // version this poor must not pass as good.
  const p = new Peer(ts.wsUrl, ts.token);
  await p.open();
  let seq = 0;
  for (let k = 0; k < 3; k++) {
    const b = simulateDryerBatch({ seed: 40 + k, id: `held-${k}`, intervalS: 60 });
    if (k === 0) await p.hello('nir-1', 1, b.axis);
    p.send({ type: 'batch-start', seq: seq++, t: b.start + k * 86_400_000, unit: 'dryer-1', batch: b.id, product: 'granule A' });
    for (let i = 0; i < b.spectra.length; i++) p.sendFrame(seq++, b.times[i]! + k * 86_400_000, Float32Array.from(b.spectra[i]!, (x, j) => x + 0.05 + 0.03 * Math.sin(j / 11)));
    p.send({ type: 'batch-end', seq: seq++, t: b.times[b.times.length - 1]! + k * 86_400_000 + 1, batch: b.id, reason: 'discharged' });
  }
  await p.waitAck(seq - 1, 60_000);
  p.close();
}, 240_000);

afterAll(async () => {
  await ts?.stop();
});

describe('approval evidence', () => {
  it('the exact binomial interval agrees with scipy (Clopper–Pearson)', () => {
    const cases: [number, number][] = [[0, 50], [3, 397], [303, 397], [14, 1000], [50, 50]];
    const py = `import json,sys\nfrom scipy.stats import binomtest\nprint(json.dumps([list(binomtest(k,n).proportion_ci(confidence_level=0.95, method='exact')) for k,n in ${JSON.stringify(cases)}]))`;
    const ref = JSON.parse(execFileSync('python3', ['-c', py]).toString()) as [number, number][];
    cases.forEach(([k, n], i) => {
      const [lo, hi] = clopperPearson(k, n);
      expect(lo).toBeCloseTo(ref[i]![0], 9);
      expect(hi).toBeCloseTo(ref[i]![1], 9);
    });
  });

  it('a version far off on held-out good batches is refused until a signed override names the reason', async () => {
    const batches = ['held-0', 'held-1', 'held-2'];
    let r = await owner.get(`/api/models/versions/${versionId}/approval-evidence`);
    expect(r.status).toBe(200);
    expect(r.body).toBeNull();
    r = await owner.post(`/api/models/versions/${versionId}/evaluate`, { batches, faulty: ['nope'] });
    expect(r.status).toBe(400);
    expect(r.body.detail).toMatch(/nope/);
    r = await owner.post(`/api/models/versions/${versionId}/evaluate`, { batches });
    expect(r.status).toBe(200);
    const ev = r.body.evidence;
    expect(ev.heldOutGood).toEqual(batches);
    expect(ev.nominalRate).toBeCloseTo(0.01, 12);
    const spectra = r.body.batches.reduce((a: number, b: { spectra: number }) => a + b.spectra, 0);
    expect(ev.points).toBe(spectra);
    expect(ev.q.farAbove || ev.t2.farAbove).toBe(true);
    const far = ev.q.farAbove ? ev.q : ev.t2;
    expect(far.rate).toBeGreaterThan(0.02);
    expect(far.interval[0]).toBeGreaterThan(0.01);
    expect(ev.worst.batch).toMatch(/^held-/);
    expect(ev.endpoint.of).toBe(3);
    const blocking = ev.warnings.filter((w: { blocking: boolean }) => w.blocking);
    expect(blocking.length).toBeGreaterThan(0);
    expect(blocking[0].text).toMatch(/of the points of the held-out good batches are beyond the 99 % (T²|Q) limit/);
    // The evidence is stored with the version: the approver reads what the builder saw.
    r = await owner.get(`/api/models/versions/${versionId}/approval-evidence`);
    expect(r.body.evaluationId).toBe(ev.evaluationId);

    // This small fixture's endpoint rule also fires early on a reference batch: one refusal names both.
    const early = ev.earlyCalls.count > 0 ? { earlyEndpointOverride: 'lab bracket covers it' } : {};
    if (ev.earlyCalls.count > 0) {
      r = await owner.post(`/api/models/versions/${versionId}/approve`, { reason: 'looks fine', password: PASSWORD });
      expect(r.status).toBe(422);
      expect(r.body.type).toMatch(/overrides-needed/);
      expect(r.body.errors.map((e: { path: string }) => e.path)).toEqual(['earlyEndpointOverride', 'evidenceOverride']);
    }
    r = await owner.post(`/api/models/versions/${versionId}/approve`, { reason: 'looks fine', password: PASSWORD, ...early });
    expect(r.status).toBe(422);
    expect(r.body.type).toMatch(/evidence-far-off/);
    expect(r.body.errors[0].path).toBe('evidenceOverride');
    expect((await owner.get(`/api/models/versions/${versionId}`)).body.status).toBe('draft');

    r = await owner.post(`/api/models/versions/${versionId}/approve`, { reason: 'trial only', password: PASSWORD, ...early, evidenceOverride: 'baseline shift from the new probe window; limits to be rebuilt after 10 batches' });
    expect(r.status).toBe(200);
    expect(r.body.status).toBe('approved');
    const audit = await owner.get('/api/audit?action=signature.approved&order=desc&limit=1');
    const after = JSON.parse(audit.body.items[0].after);
    expect(after.override).toContain('approval evidence: baseline shift from the new probe window');
    expect(after.evidence.evaluationId).toBe(ev.evaluationId);
    expect(after.evidence.warnings).toEqual(expect.arrayContaining([blocking[0].code]));
  });

  it('batches marked faulty are stored with the evaluation and left out of the rates', async () => {
    const r = await owner.post(`/api/models/versions/${versionId}/evaluate`, { batches: ['held-0', 'held-1'], faulty: ['held-0', 'held-1'] });
    expect(r.status).toBe(200);
    expect(r.body.faulty).toEqual(['held-0', 'held-1']);
    expect(r.body.evidence.heldOutGood).toEqual([]);
    expect(r.body.evidence.excluded.map((e: { why: string }) => e.why)).toEqual(['marked faulty', 'marked faulty']);
    expect(r.body.evidence.warnings.map((w: { code: string }) => w.code).filter((c: string) => c !== 'early-endpoint')).toEqual(['no-held-out']);
    const detail = await owner.get(`/api/models/versions/${versionId}`);
    expect(detail.body.evaluations.some((e: { faulty?: string[] }) => e.faulty?.length === 2)).toBe(true);
  });
});
