/**
 * The record of an ended batch through REST and the PDF report, with a real server and a real
 * model: an alarm nobody acknowledged returns unacknowledged when the batch ends and stays to be
 * acknowledged with its batch (ANSI/ISA-18.2-2016 §11.5: return to normal does not acknowledge);
 * the end reason agrees with the endpoint record; the report names no time after its generation.
 */
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdirSync, writeFileSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch } from '../../simulators/batch.ts';
import { chromiumPath } from '../../server/transfer/report-pdf.ts';
import { INTERNAL_CODE_WORDS } from '../../core/vocabulary/plain-names.ts';
import { buildSmallDryerModel, installModel } from './model-fixture.ts';
import { Peer, login, startTestServer, type Session, type TestServer } from './helpers.ts';

let ts: TestServer;
let admin: Session;
let operator: Session;

beforeAll(async () => {
  ts = await startTestServer({}, { units: ['dryer-1'] });
  admin = await login(ts, 'administrator');
  operator = await login(ts, 'operator');
  const { model, text } = buildSmallDryerModel(11);
  await installModel(ts.server.ctx.storage, text, model, 'dryer-1');
  await ts.server.ctx.ingest.refreshDeployment('dryer-1');
  // A batch whose spectra go far off the model half-way, stopped there (the endpoint is not reached);
  // the analyzer still reports "stopped after the endpoint".
  const b = simulateDryerBatch({ seed: 21, id: 'stalled-1', intervalS: 60 });
  const n = Math.floor(b.spectra.length * 0.4);
  const p = new Peer(ts.wsUrl, ts.token);
  await p.open();
  await p.hello('nir-1', 1, b.axis);
  let seq = 0;
  p.send({ type: 'batch-start', seq: seq++, t: b.start, unit: 'dryer-1', batch: b.id, product: 'granule A' });
  for (let i = 0; i < n; i++) {
    const v = Float32Array.from(b.spectra[i]!, (x, j) => (i > n / 2 ? x * 1.6 + 0.2 * Math.sin(j / 7) : x));
    p.sendFrame(seq++, b.times[i]!, v);
  }
  p.send({ type: 'batch-end', seq: seq++, t: b.times[n - 1]! + 1, batch: b.id, reason: 'stopped after the endpoint' });
  await p.waitAck(seq - 1, 60_000);
  p.close();
}, 240_000);

afterAll(async () => {
  await ts?.stop();
});

describe('an ended batch keeps its unacknowledged alarms, and its record agrees with itself', () => {
  it('alarms raised and not acknowledged return unacknowledged, listed with their batch; acknowledging returns them to normal', async () => {
    let r = await admin.get('/api/alarms?batch=stalled-1&limit=100');
    expect(r.status).toBe(200);
    const alarms = r.body.items as { id: string; state: string; active: boolean; batch: string; suppressedBy: string[]; kind: string }[];
    const processAlarms = alarms.filter((a) => a.kind !== 'stale' && a.kind !== 'analyzer');
    expect(processAlarms.length).toBeGreaterThan(0);
    for (const a of processAlarms) {
      expect(a.state).toBe('cleared-unacknowledged');
      expect(a.active).toBe(false);
      expect(a.batch).toBe('stalled-1');
      expect(a.suppressedBy).toEqual([]);
    }
    const audit = await admin.get('/api/audit?action=alarm.&limit=500');
    const actions = (audit.body.items as { action: string; object: string }[]).filter((e) => processAlarms.some((a) => e.object === `alarm:${a.id}`)).map((e) => e.action);
    expect(actions).toContain('alarm.return');
    expect(actions).not.toContain('alarm.suppress');
    // still listed as open (to be acknowledged) after the batch
    r = await admin.get('/api/alarms?unit=dryer-1&open=true&limit=100');
    expect((r.body.items as { id: string }[]).map((a) => a.id)).toEqual(expect.arrayContaining(processAlarms.map((a) => a.id)));
    r = await operator.post(`/api/alarms/${processAlarms[0]!.id}/acknowledge`, { comment: 'seen after the batch' });
    expect(r.status).toBe(200);
    expect(r.body.state).toBe('normal');
  });

  it('the end reason agrees with the endpoint record, and the analyzer\'s words are kept', async () => {
    const r = await admin.get('/api/batches/stalled-1');
    expect(r.status).toBe(200);
    expect(r.body.endpointState).not.toMatch(/^(done|signalled)$/);
    expect(r.body.endReason).toMatch(/^ended without reaching the endpoint/);
    expect(r.body.reportedEndReason).toBe('stopped after the endpoint');
    expect(r.body.end.code).toBe('without-endpoint');
    expect(r.body.end.disagreement).toContain('stopped after the endpoint');
    // the batch pickers' data: why this batch is no good batch
    const list = await admin.get('/api/batches?unit=dryer-1');
    const row = list.body.items.find((b: { id: string }) => b.id === 'stalled-1');
    const codes = row.suspect.map((x: { code: string }) => x.code);
    expect(codes).toEqual(['alarms', 'endpoint-not-reached']);
    expect(row.suspect[0].text).toBe(`${row.alarmCount} alarms raised while it ran`);
    expect(row.suspect[1].text).toMatch(/^endpoint not reached \((running|nearing|settling)/);
  });

  const haveTools = chromiumPath() !== null && spawnSync('pdftotext', ['-v']).status === 0;
  it.skipIf(!haveTools)('the PDF states the same end, no time after its generation, and no internal code word (pdftotext)', async () => {
    const res = await fetch(`${ts.server.url}/api/batches/stalled-1/report.pdf`, { headers: { cookie: admin.cookie } });
    expect(res.status).toBe(200);
    mkdirSync('test-results', { recursive: true });
    writeFileSync('test-results/report-stalled.pdf', Buffer.from(await res.arrayBuffer()));
    const text = execFileSync('pdftotext', ['test-results/report-stalled.pdf', '-']).toString().replace(/\s+/g, ' ');
    expect(text).toContain('ended without reaching the endpoint');
    expect(text).not.toMatch(/End stopped after the endpoint/);
    expect(text).toContain('cleared, not acknowledged');
    const generated = /generated (\d{4}-\d\d-\d\d \d\d:\d\d:\d\d) UTC/.exec(text);
    expect(generated).not.toBeNull();
    const gen = Date.parse(generated![1]!.replace(' ', 'T') + 'Z');
    const started = /Started \/ ended (\d{4}-\d\d-\d\d \d\d:\d\d:\d\d) UTC/.exec(text);
    expect(started).not.toBeNull();
    expect(Date.parse(started![1]!.replace(' ', 'T') + 'Z')).toBeLessThanOrEqual(gen);
    for (const m of text.matchAll(/(\d{4}-\d\d-\d\d \d\d:\d\d:\d\d) UTC/g)) expect(Date.parse(m[1]!.replace(' ', 'T') + 'Z'), m[0]).toBeLessThanOrEqual(gen + 1000);
    for (const w of INTERNAL_CODE_WORDS) expect(text, w).not.toMatch(new RegExp(`(?<![\\w-])${w}(?![\\w-])`));
  });
  if (!haveTools) it('PDF check skipped: Debian chromium or poppler-utils is not installed', () => expect(haveTools).toBe(false));

  it('the rest of the batch\'s alarms are acknowledged in one action: each moves on, one audit entry lists them', async () => {
    let r = await admin.get('/api/alarms?batch=stalled-1&open=true&limit=100');
    const left = (r.body.items as { id: string; state: string; key: string }[]).filter((a) => a.state === 'cleared-unacknowledged' || a.state === 'active-unacknowledged');
    expect(left.length).toBeGreaterThanOrEqual(2);
    const ids = left.map((a) => a.id);
    // all or none: one alarm with nothing to acknowledge refuses the group, naming it
    const done = (await admin.get('/api/alarms?batch=stalled-1&state=normal&limit=100')).body.items as { id: string }[];
    r = await operator.post('/api/alarms/acknowledge', { alarms: [...ids, done[0]!.id], comment: 'reviewed with QA' });
    expect(r.status).toBe(409);
    expect(r.body.errors).toEqual([{ path: `alarms/${ids.length}`, message: expect.stringMatching(/is normal: there is nothing to acknowledge/) }]);
    expect(((await admin.get('/api/alarms?batch=stalled-1&open=true&limit=100')).body.items as unknown[]).length).toBe(left.length);
    r = await operator.post('/api/alarms/acknowledge', { alarms: [ids[0], ids[0]] });
    expect(r.status).toBe(400);

    const before = (await admin.get('/api/audit?limit=1&order=desc')).body.items[0].seq as number;
    r = await operator.post('/api/alarms/acknowledge', { alarms: ids, comment: 'reviewed with QA' });
    expect(r.status).toBe(200);
    expect(r.body.acknowledged).toBe(ids.length);
    for (const a of r.body.alarms as { state: string; acknowledgedBy: string; acknowledgeComment: string }[]) {
      expect(a.state).toBe('normal');
      expect(a.acknowledgedBy).toBe('u-operator');
      expect(a.acknowledgeComment).toBe('reviewed with QA');
    }
    r = await admin.get('/api/alarms?batch=stalled-1&open=true&limit=100');
    expect(r.body.items).toEqual([]);
    // one operator action in the audit trail (each alarm's own state change is the system's record)
    const audit = await admin.get(`/api/audit?user=u-operator&order=asc&limit=100`);
    const mine = (audit.body.items as { seq: number; action: string; object: string; after: string; reason: string }[]).filter((e) => e.seq > before);
    expect(mine.map((e) => e.action)).toEqual(['alarm.acknowledge-group']);
    expect(mine[0]!.object).toBe('batch:stalled-1');
    expect(mine[0]!.reason).toBe('reviewed with QA');
    const after = JSON.parse(mine[0]!.after);
    expect(after.count).toBe(ids.length);
    expect(after.alarms.map((a: { id: string }) => a.id)).toEqual(ids);
    for (const a of after.alarms) {
      expect(a.to).toBe('normal');
      expect(a.name).not.toMatch(/^(t2|q|pc\d|pace)$/);
    }
  });
});
