/**
 * Deploys through REST with a real server: a version that cannot judge a unit (another analyzer
 * axis, product, unit kind) is refused naming both sides; a version that drops the endpoint
 * property of the one it replaces needs a confirmation with a reason; the answer and the audit
 * entry carry the comparison.
 */
import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateReferenceSet, simulateReactorBatch } from '../../simulators/batch.ts';
import { buildMonitoringModel, serializeMonitoringModel, type MonitoringModel } from '../../core/model/monitoring-model.ts';
import { buildSmallDryerModel, installModel } from './model-fixture.ts';
import { Peer, login, startTestServer, type Session, type TestServer, analyzerToken } from './helpers.ts';

let ts: TestServer;
let admin: Session;
let dryerV1: string;
let dryerNoProperty: string;

async function stream(p: Peer, firstSeq: number, unit: string, product: string, b: { id: string; start: number; times: number[]; spectra: Float32Array[] }): Promise<number> {
  let seq = firstSeq;
  p.send({ type: 'batch-start', seq: seq++, t: b.start, unit, batch: b.id, product });
  for (let i = 0; i < b.spectra.length; i++) p.sendFrame(seq++, b.times[i]!, b.spectra[i]!);
  p.send({ type: 'batch-end', seq: seq++, t: b.times[b.times.length - 1]! + 1, batch: b.id, reason: 'discharged' });
  await p.waitAck(seq - 1, 60_000);
  return seq;
}

/** Store a built model as an approved, undeployed version (as the Model bench leaves it). */
async function insertApproved(model: MonitoringModel): Promise<string> {
  const st = ts.server.ctx.storage;
  const id = randomUUID();
  await st.insertModelVersion({
    id, name: model.settings.name, version: await st.nextModelVersion(model.settings.name), product: model.settings.product, sha256: model.sha256,
    body: serializeMonitoringModel(model), settings: model.settings as unknown as Record<string, unknown>, referenceBatches: model.meta.batches.map((b) => b.id),
    components: model.pca.nComponents, confidence: model.settings.confidence, status: 'draft', createdAt: 0, createdBy: 'test',
    approvedAt: null, approvedBy: null, approvalReason: null, retiredAt: null, retiredBy: null, retireReason: null,
  });
  await st.approveModelVersion(id, 'test', 1, 'test fixture');
  return id;
}

beforeAll(async () => {
  ts = await startTestServer({ units: [{ id: 'dryer-1', kind: 'dryer' }, { id: 'reactor-1', kind: 'reactor' }] });
  admin = await login(ts, 'administrator');
  // The dryer's reference batches are stored on dryer-1, so the version's kind is known.
  const refs = simulateReferenceSet('dryer', 4, 11, { intervalS: 60 });
  const p = new Peer(ts.wsUrl, ts.token);
  await p.open();
  await p.hello('nir-1', 1, refs[0]!.axis);
  let seq = 0;
  for (const b of refs) seq = await stream(p, seq, 'dryer-1', 'granule A', b);
  p.close();
  const { model, text } = buildSmallDryerModel(11);
  dryerV1 = await installModel(ts.server.ctx.storage, text, model, 'dryer-1');
  await ts.server.ctx.ingest.refreshDeployment('dryer-1');
  // The same batches, a version without a property model: the endpoint falls back to the moving-block SD.
  const noProp = buildMonitoringModel(
    refs.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra })),
    { name: 'dryer-test', product: 'granule A', author: 'test', createdAt: 0, components: 3, referenceEndpoints: refs.map((b) => (b.truth.endpointIndex === null ? { batch: b.id, last: true as const } : { batch: b.id, index: b.truth.endpointIndex })) },
  );
  dryerNoProperty = await insertApproved(noProp);
  // The reactor runs another product on another analyzer with its own axis.
  const rTok = await analyzerToken(ts.server.ctx.storage, 'nir-r');
  const r = simulateReactorBatch({ seed: 3, id: 'reactor-b1', intervalS: 120 });
  const pr = new Peer(ts.wsUrl, rTok);
  await pr.open();
  await pr.hello('nir-r', 1, r.axis);
  await stream(pr, 0, 'reactor-1', 'amide C', r);
  pr.close();
}, 240_000);

afterAll(async () => {
  await ts?.stop();
});

describe('REST: deploys that cannot go wrong quietly', () => {
  it('refuses a dryer version on the reactor, naming the axis, product and kind of both', async () => {
    let r = await admin.get(`/api/deployments/preview?unit=reactor-1&versionId=${dryerV1}`);
    expect(r.status).toBe(200);
    expect(r.body.mismatches.map((m: { what: string }) => m.what).sort()).toEqual(['axis', 'kind', 'product']);
    r = await admin.post('/api/deployments', { unit: 'reactor-1', versionId: dryerV1, reason: 'try' });
    expect(r.status).toBe(422);
    expect(r.body.type).toMatch(/model-does-not-fit/);
    const refAxis = simulateReferenceSet('dryer', 1, 11, { intervalS: 60 })[0]!.axis.length;
    const rAxis = simulateReactorBatch({ seed: 3, id: 'x', intervalS: 120 }).axis.length;
    expect(refAxis).not.toBe(rAxis);
    expect(r.body.detail).toContain(`expects ${refAxis} points`);
    expect(r.body.detail).toContain(`nir-r sends ${rAxis} points`);
    expect(r.body.detail).toContain('product "granule A"');
    expect(r.body.detail).toContain('product "amide C"');
    expect(r.body.detail).toMatch(/batches of a dryer \(dryer-1\); reactor-1 is a reactor/);
    // nothing changed on the reactor
    r = await admin.get('/api/units/reactor-1');
    expect(r.body.deployment).toBeNull();
  });

  it('shows what a version changes, and asks for a reason before dropping the endpoint property', async () => {
    let r = await admin.get(`/api/deployments/preview?unit=dryer-1&versionId=${dryerNoProperty}`);
    expect(r.status).toBe(200);
    expect(r.body.mismatches).toEqual([]);
    expect(r.body.comparison.replaces.versionId).toBe(dryerV1);
    expect(r.body.comparison.dropsEndpointProperty).toBe(true);
    expect(r.body.needsEndpointLossConfirmation).toBe(true);
    const whats = r.body.comparison.changes.map((c: { what: string }) => c.what);
    expect(whats).toContain('endpoint rule');
    expect(whats).toContain('property model');
    const prop = r.body.comparison.changes.find((c: { what: string }) => c.what === 'property model');
    expect(prop.before).toMatch(/^moisture \(% w\/w\)/);
    expect(prop.after).toBeNull();
    const rule = r.body.comparison.changes.find((c: { what: string }) => c.what === 'endpoint rule');
    expect(rule.before).toMatch(/predicted property/);
    expect(rule.after).toMatch(/moving-block standard deviation/);
    expect(r.body.comparison.warnings[0]).toMatch(/predicted moisture \(% w\/w\) and its endpoint criterion .* are dropped/);
    expect(JSON.stringify(r.body.comparison)).not.toMatch(/\bmbsd\b/);

    r = await admin.post('/api/deployments', { unit: 'dryer-1', versionId: dryerNoProperty });
    expect(r.status).toBe(422);
    expect(r.body.type).toMatch(/endpoint-would-be-lost/);
    expect(r.body.errors.map((e: { path: string }) => e.path)).toEqual(['confirmEndpointLoss', 'password']);
    expect((await admin.get('/api/units/dryer-1')).body.deployment.versionId).toBe(dryerV1);

    // The reason alone is not enough: dropping the endpoint is signed.
    const why = 'moisture endpoint moves to the lab; trial of the spectral rule';
    r = await admin.post('/api/deployments', { unit: 'dryer-1', versionId: dryerNoProperty, reason: 'trial', confirmEndpointLoss: why });
    expect(r.status).toBe(422);
    expect(r.body.errors.map((e: { path: string }) => e.path)).toEqual(['password']);
    r = await admin.post('/api/deployments', { unit: 'dryer-1', versionId: dryerNoProperty, reason: 'trial', confirmEndpointLoss: why, password: 'not my password' });
    expect(r.status).toBe(401);
    expect(r.body.type).toMatch(/signature-refused/);
    expect(r.body.errors[0].path).toBe('password');
    expect((await admin.get('/api/units/dryer-1')).body.deployment.versionId).toBe(dryerV1);

    r = await admin.post('/api/deployments', { unit: 'dryer-1', versionId: dryerNoProperty, reason: 'trial', confirmEndpointLoss: why, password: 'correct horse battery staple 42' });
    expect(r.status).toBe(201);
    expect(r.body.comparison.dropsEndpointProperty).toBe(true);
    expect((await admin.get('/api/units/dryer-1')).body.deployment.versionId).toBe(dryerNoProperty);

    // The signature on the version carries the reason as its signed override, bound to the model's hash.
    const v = await admin.get(`/api/models/versions/${dryerNoProperty}`);
    const sig = (v.body.signatures as { meaning: string; override: string | null; reason: string; modelSha256: string; auditSeq: number }[]).find((x) => x.meaning === 'deployed');
    expect(sig).toBeDefined();
    expect(sig!.override).toBe(why);
    expect(sig!.reason).toBe('trial');
    expect(sig!.modelSha256).toBe(v.body.sha256);
    // Its audit record holds the reason and the comparison it was signed against ...
    const sa = await admin.get('/api/audit?action=signature.deployed&order=desc&limit=1');
    const sEntry = { ...sa.body.items[0], after: JSON.parse(sa.body.items[0].after) };
    expect(sEntry.seq).toBe(sig!.auditSeq);
    expect(sEntry.object).toBe(`model:${dryerNoProperty}`);
    expect(sEntry.after.override).toBe(why);
    expect(sEntry.after.evidence.endpointLoss.reason).toBe(why);
    expect(sEntry.after.evidence.comparison.replaces.versionId).toBe(dryerV1);
    // ... and the deployment's audit entry names the signature and gives the reason.
    const audit = await admin.get('/api/audit?action=model.deploy&order=desc&limit=1');
    const entry = { ...audit.body.items[0], after: JSON.parse(audit.body.items[0].after) };
    expect(entry.after.confirmEndpointLoss).toBe(why);
    expect(entry.after.signature.auditSeq).toBe(sig!.auditSeq);
    expect(entry.reason).toBe(`trial; endpoint property dropped: ${why}`);
    expect(entry.after.comparison.replaces.versionId).toBe(dryerV1);
    expect(entry.after.comparison.changes.some((c: { what: string }) => c.what === 'property model')).toBe(true);
    // A refused signature left its trace, and deployed nothing.
    const failed = await admin.get(`/api/audit?action=signature.failed&object=model:${dryerNoProperty}&limit=5`);
    expect(failed.body.items.length).toBe(1);
  });

  it('a version fits the unit it was built for and drops nothing against itself', async () => {
    const r = await admin.get(`/api/deployments/preview?unit=dryer-1&versionId=${dryerV1}`);
    expect(r.body.mismatches).toEqual([]);
    expect(r.body.comparison.dropsEndpointProperty).toBe(false);
  });
});
