/**
 * Approval against the leave-one-batch-out endpoint check (through REST): a version whose rule
 * reaches done before the known endpoint on reference batches is refused (422, naming the batches
 * and intervals) unless the approver gives earlyEndpointOverride, which is then signed with the
 * approval and kept in the signature record and the audit trail; an override with nothing to
 * override is refused.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateReferenceSet } from '../../simulators/batch.ts';
import { Peer, login, startTestServer, type Session, type TestServer } from './helpers.ts';

let ts: TestServer;
let owner: Session;
const refs = simulateReferenceSet('dryer', 3, 41, { intervalS: 60 });
const ids = refs.map((b) => b.id);
// the stored batches carry no lab values: the endpoints are marked (at the simulated truth)
const marks = refs.map((b) => ({ batch: b.id, index: b.truth.endpointIndex! }));
const PASSWORD = 'correct horse battery staple 42';

beforeAll(async () => {
  ts = await startTestServer({}, { units: ['dryer-1'] });
  owner = await login(ts, 'administrator');
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

async function build(name: string, threshold: number): Promise<string> {
  const r = await owner.post('/api/models/build', {
    name, product: 'granule A', referenceBatches: ids,
    settings: { components: 2, referenceEndpoints: marks, endpoint: { criteria: [{ kind: 'mbsd', block: 3, threshold }], combine: 'all', confirm: 2, nearingMin: 5 } },
  });
  expect(r.status, JSON.stringify(r.body)).toBe(201);
  return r.body.versionId;
}

describe('approval and the endpoint check', () => {
  it('a rule that fires at once is early on every reference batch: refused without an override, naming batches and intervals', async () => {
    // an MBSD threshold no spectrum block exceeds: done after the first 3 + 1 spectra
    const v = await build('early-rule', 1e6);
    const d = (await owner.get(`/api/models/versions/${v}`)).body;
    expect(d.endpointCheck.early).toBe(3);
    expect(d.endpointCheck.rows[0]).toMatchObject({ batch: ids[0], firedIndex: 3, knownIndex: marks[0]!.index, intervals: 3 - marks[0]!.index, verdict: 'early' });
    expect(d.notes).toContainEqual(expect.stringMatching(/^Endpoint check \(leave one batch out\): the rule reached done before the known endpoint on 3 of 3 reference batches/));
    let r = await owner.post(`/api/models/versions/${v}/approve`, { reason: 'checked', password: PASSWORD });
    expect(r.status).toBe(422);
    expect(r.type).toContain('application/problem+json');
    expect(r.body).toMatchObject({ type: '/problems/early-endpoint', title: 'Endpoint rule fires early' });
    expect(r.body.detail).toContain(`"${ids[0]}" ${marks[0]!.index - 3} intervals (${(marks[0]!.index - 3).toFixed(1)} min) early`);
    expect(r.body.detail).toMatch(/approve with earlyEndpointOverride/);
    expect((await owner.get(`/api/models/versions/${v}`)).body.status).toBe('draft');
    // a blank override is no override
    r = await owner.post(`/api/models/versions/${v}/approve`, { reason: 'checked', password: PASSWORD, earlyEndpointOverride: '  ' });
    expect(r.status).toBe(400);
    // with the override: approved, and the override is signed and audited
    const override = 'the dryer is stopped by its exhaust-temperature interlock; this model only advises';
    r = await owner.post(`/api/models/versions/${v}/approve`, { reason: 'checked on 3 batches', password: PASSWORD, earlyEndpointOverride: override });
    expect(r.status, JSON.stringify(r.body)).toBe(200);
    expect(r.body.status).toBe('approved');
    const sig = r.body.signatures.find((s: any) => s.meaning === 'approved');
    expect(sig).toMatchObject({ reason: 'checked on 3 batches', override, modelSha256: d.sha256 });
    const audit = (await owner.get('/api/audit?action=signature.approved')).body.items;
    const rec = audit.find((a: any) => a.object === `model:${v}`);
    expect(JSON.parse(rec.after)).toMatchObject({ meaning: 'approved', objectHash: d.sha256, override });
    expect(rec.reason).toBe('checked on 3 batches');
  });
  it('an override with nothing to override is refused; the plain approval goes through with no override recorded', async () => {
    // a threshold no block reaches: never done, so never early
    const v = await build('late-rule', 1e-12);
    const d = (await owner.get(`/api/models/versions/${v}`)).body;
    expect(d.endpointCheck.early).toBe(0);
    expect(d.endpointCheck.notReached).toBe(3);
    let r = await owner.post(`/api/models/versions/${v}/approve`, { reason: 'checked', password: PASSWORD, earlyEndpointOverride: 'just in case' });
    expect(r.status).toBe(422);
    expect(r.body).toMatchObject({ type: '/problems/nothing-to-override' });
    r = await owner.post(`/api/models/versions/${v}/approve`, { reason: 'checked', password: PASSWORD });
    expect(r.status).toBe(200);
    expect(r.body.signatures.find((s: any) => s.meaning === 'approved').override).toBeNull();
  });
});
