/**
 * Time limit on suppression by function check (ingest.functionCheckMaxMs). While the analyzer
 * reports NAMUR NE 107 function check, Tideline suppresses the unit's model and stale-data alarms
 * (ANSI/ISA-18.2-2016 designed suppression). An analyzer that stays in function check (a stuck
 * cleaning cycle, a forgotten maintenance mode) must not hide them for ever: beyond the limit the
 * suppression lapses, the standing conditions are annunciated and Tideline raises its own analyzer
 * alarm 'function-check-overdue', which clears when the analyzer reports another status.
 *
 * Driven over the real ingest protocol with a real small model (test/server/model-fixture.ts); the
 * limit is reached on the server's injected clock, advanced by the test, not by waiting.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch } from '../../simulators/batch.ts';
import { loadConfig } from '../../server/config.ts';
import { applyEvent, emptyUnitState, type UnitSignalState } from '../../server/signals/unit-state.ts';
import { Peer, login, startTestServer, type Session, type TestServer, sqliteDb } from './helpers.ts';
import { buildSmallDryerModel, installModel } from './model-fixture.ts';

const MODEL_KINDS = ['t2', 'q', 'combined', 'envelope', 'property'];
const MIN = 60_000;
const batch = simulateDryerBatch({ seed: 5, id: 'sim', intervalS: 60 });
const fixture = buildSmallDryerModel();

const servers: TestServer[] = [];
const dirs: string[] = [];
afterAll(async () => {
  for (const s of servers) await s.stop();
  for (const d of dirs) rmSync(d, { recursive: true, force: true });
});

/**
 * A server whose clock runs `clock.offset` ms ahead of the wall clock, with the small model deployed
 * on dryer-1 (`restart`: start on the data folder of an earlier server, with its clock, deploying nothing).
 */
async function serverWithModel(ingest: Record<string, unknown>, opts: { dir?: string; restart?: { offset: number } } = {}) {
  const clock = opts.restart ?? { offset: 0 };
  const ts = await startTestServer({ ingest } as never, { units: ['dryer-1'], now: () => Date.now() + clock.offset, ...(opts.dir ? { dir: opts.dir } : {}) });
  servers.push(ts);
  if (!opts.restart) {
    await installModel(ts.server.ctx.storage, fixture.text, fixture.model, 'dryer-1');
    await ts.server.ctx.ingest.refreshDeployment('dryer-1');
  }
  return { ts, clock, viewer: await login(ts, 'viewer') };
}

/**
 * Batch start, three good spectra, function check (probe cleaning), then six spectra of a fouled
 * window (baseline offset and slope, far outside the model). Returns the next seq.
 */
async function fouledInFunctionCheck(p: Peer, id: string): Promise<number> {
  await p.hello('nir-1', 1, batch.axis);
  const t = (i: number) => batch.times[i]!;
  p.send({ type: 'batch-start', seq: 0, t: batch.start, unit: 'dryer-1', batch: id, product: 'granule A' });
  let seq = 1;
  for (let i = 0; i < 3; i++) p.send({ type: 'spectrum', seq: seq++, t: t(i), values: Array.from(batch.spectra[i]!) });
  p.send({ type: 'analyzer-status', seq: seq++, t: t(2) + 1, status: 'function-check', code: 'probe-cleaning' });
  for (let i = 3; i < 9; i++) p.send({ type: 'spectrum', seq: seq++, t: t(i), values: Array.from(batch.spectra[i]!, (x, k) => x + 0.3 + 0.0005 * k) });
  await p.waitAck(seq - 1);
  return seq;
}

async function alarmsOf(viewer: Session, id: string): Promise<any[]> {
  return (await viewer.get(`/api/alarms?batch=${id}`)).body.items as any[];
}

/** Poll the batch's alarms until one satisfies `pred` (the periodic tick runs at most every second). */
async function waitAlarm(viewer: Session, id: string, pred: (a: any) => boolean, what: string): Promise<any> {
  for (let i = 0; i < 600; i++) {
    const a = (await alarmsOf(viewer, id)).find(pred);
    if (a) return a;
    await new Promise((r) => setTimeout(r, 25));
  }
  throw new Error(`no alarm ${what}; alarms: ${JSON.stringify(await alarmsOf(viewer, id)).slice(0, 800)}`);
}

describe('ingest.functionCheckMaxMs: configuration', () => {
  it('defaults to 15 minutes; 0 and null mean no limit', () => {
    expect(loadConfig().ingest.functionCheckMaxMs).toBe(15 * MIN);
    expect(loadConfig({ overrides: { ingest: { functionCheckMaxMs: null } } }).ingest.functionCheckMaxMs).toBeNull();
    expect(loadConfig({ env: { TIDELINE_FUNCTION_CHECK_MAX_MS: '0' } }).ingest.functionCheckMaxMs).toBe(0);
    expect(loadConfig({ flags: { 'ingest.function-check-max-ms': '600000' } }).ingest.functionCheckMaxMs).toBe(600_000);
  });
  it('refuses a bad value with a message naming the setting and its source', () => {
    expect(() => loadConfig({ flags: { 'ingest.functionCheckMaxMs': '500' } })).toThrow(/configuration: ingest\.functionCheckMaxMs: must be 0 or null \(no limit, not recommended\) or at least 1000 ms/);
    expect(() => loadConfig({ overrides: { ingest: { functionCheckMaxMs: -1 } } })).toThrow(/ingest\.functionCheckMaxMs: Too small/);
    expect(() => loadConfig({ overrides: { ingest: { functionCheckMaxMs: 1500.5 } } })).toThrow(/ingest\.functionCheckMaxMs: .*expected int/);
    expect(() => loadConfig({ env: { TIDELINE_FUNCTION_CHECK_MAX_MS: 'soon' } })).toThrow(/environment TIDELINE_FUNCTION_CHECK_MAX_MS: ingest\.functionCheckMaxMs must be a number, got "soon"/);
  });
});

describe('function check beyond ingest.functionCheckMaxMs during a batch', () => {
  it('lapses the suppression, annunciates the standing conditions, raises function-check-overdue until the analyzer reports good', async () => {
    const { ts, clock, viewer } = await serverWithModel({ staleAfterMs: MIN });
    expect(ts.server.ctx.config.ingest.functionCheckMaxMs).toBe(15 * MIN);
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    let seq = await fouledInFunctionCheck(p, 'fc-1');

    // within the limit: the out-of-model conditions are tracked but suppressed by function-check
    const model = (await alarmsOf(viewer, 'fc-1')).filter((a) => MODEL_KINDS.includes(a.kind) && a.active);
    expect(model.length).toBeGreaterThan(0);
    for (const a of model) expect(a).toMatchObject({ state: 'normal', suppressedBy: ['function-check'] });

    // 2 min of silence on the server clock (> staleAfterMs, < the limit): the stale condition is
    // raised, suppressed; that tick also checked the limit and found it not reached
    clock.offset += 2 * MIN;
    const stale = await waitAlarm(viewer, 'fc-1', (a) => a.kind === 'stale' && a.active, 'stale');
    expect(stale).toMatchObject({ state: 'normal', suppressedBy: ['function-check'] });
    expect((await alarmsOf(viewer, 'fc-1')).some((a) => a.key === 'function-check-overdue')).toBe(false);
    expect((await viewer.get('/api/units/dryer-1')).body).toMatchObject({ activeAlarms: 0, suppression: ['function-check'] });

    // past 15 min in function check: Tideline's own alarm, and the suppression lapses
    clock.offset += 14 * MIN;
    const overdue = await waitAlarm(viewer, 'fc-1', (a) => a.key === 'function-check-overdue', 'function-check-overdue');
    expect(overdue).toMatchObject({ kind: 'analyzer', priority: 1, active: true, state: 'active-unacknowledged', suppressedBy: [], limit: 15 });
    expect(overdue.value).toBeGreaterThanOrEqual(16);
    expect(overdue.value).toBeLessThan(17);
    expect(overdue.message).toMatch(/^analyzer nir-1 has been in function check \(NE 107 C\) for 16(\.\d)? min during batch fc-1, beyond the limit of 15 min \(ingest\.functionCheckMaxMs\)/);
    const now = await alarmsOf(viewer, 'fc-1');
    for (const m of model) expect(now.find((a) => a.id === m.id)).toMatchObject({ active: true, state: 'active-unacknowledged', suppressedBy: [] });
    expect(now.find((a) => a.id === stale.id)).toMatchObject({ active: true, state: 'active-unacknowledged', suppressedBy: [] });
    const unit = (await viewer.get('/api/units/dryer-1')).body;
    expect(unit.analyzerStatus.status).toBe('function-check');
    expect(unit.suppression).toEqual([]);
    expect(unit.activeAlarms).toBe(model.length + 2);
    expect(unit.highestPriority).toBe(1);

    // audit trail: each release recorded by the server, naming why
    const admin = await login(ts, 'administrator');
    const audit = (await admin.get('/api/audit?action=alarm.unsuppress&limit=100')).body.items as any[];
    for (const a of [...model, stale]) {
      const rec = audit.find((r) => r.object === `alarm:${a.id}`);
      expect(rec, `audit record for ${a.key}`).toBeDefined();
      expect(rec.user).toBe('system');
      expect(rec.reason).toMatch(/beyond the limit of 15 min \(ingest\.functionCheckMaxMs\); no longer suppressed$/);
    }

    // outbox (what OPC UA, MQTT and webhooks deliver): the overdue alarm row, then the releases
    const rows = sqliteDb(ts.server.ctx.storage)
      .prepare(`SELECT unit_seq, type, payload FROM outbox WHERE unit = 'dryer-1' ORDER BY unit_seq`)
      .all() as { unit_seq: number; type: string; payload: string }[];
    const alarmRows = rows.filter((r) => r.type === 'alarm').map((r) => ({ at: r.unit_seq, ...JSON.parse(r.payload).alarm }));
    const raised = alarmRows.find((a) => a.key === 'function-check-overdue');
    expect(raised).toMatchObject({ state: 'active-unacknowledged', active: true, priority: 1 });
    const released = alarmRows.filter((a) => a.at > raised.at && a.key !== 'function-check-overdue');
    expect(new Set(released.map((a) => a.id))).toEqual(new Set([...model, stale].map((a) => a.id)));
    for (const a of released) expect(a).toMatchObject({ state: 'active-unacknowledged', suppressedBy: [] });

    // the analyzer reports good: the overdue alarm clears (cleared-unacknowledged until acknowledged)
    p.send({ type: 'analyzer-status', seq: seq++, t: batch.times[8]! + 2, status: 'good' });
    await p.waitAck(seq - 1);
    const cleared = (await alarmsOf(viewer, 'fc-1')).find((a) => a.id === overdue.id);
    expect(cleared).toMatchObject({ active: false, state: 'cleared-unacknowledged' });
    expect(cleared.message).toBe('function check of analyzer nir-1 over: analyzer nir-1 reports good');
    const last = sqliteDb(ts.server.ctx.storage)
      .prepare(`SELECT payload FROM outbox WHERE unit = 'dryer-1' AND type = 'alarm' ORDER BY unit_seq DESC LIMIT 1`)
      .get() as { payload: string };
    expect(JSON.parse(last.payload).alarm).toMatchObject({ id: overdue.id, active: false, state: 'cleared-unacknowledged' });
    // the model conditions still stand and stay annunciated
    for (const m of model) expect((await alarmsOf(viewer, 'fc-1')).find((a) => a.id === m.id)).toMatchObject({ active: true, state: 'active-unacknowledged' });

    // the unit state the signal channels publish (OPC UA AnalyzerStatus / AnalyzerFault, MQTT), fed
    // the unit's outbox in order: failure while the overdue alarm stands, the analyzer's report after
    const outbox = sqliteDb(ts.server.ctx.storage)
      .prepare(`SELECT id, unit, unit_seq, type, payload, created_at FROM outbox WHERE unit = 'dryer-1' ORDER BY unit_seq`)
      .all() as { id: string; unit: string; unit_seq: number; type: string; payload: string; created_at: number }[];
    let sig: UnitSignalState = emptyUnitState('dryer-1', 0);
    let atOverdue: UnitSignalState | null = null;
    for (const r of outbox) {
      sig = applyEvent(sig, { id: r.id, unit: r.unit, seq: r.unit_seq, type: r.type, createdAt: r.created_at, payload: JSON.parse(r.payload) }, r.created_at);
      if (r.unit_seq === raised.at) atOverdue = sig;
    }
    expect(atOverdue!.analyzer).toBe('failure');
    expect(atOverdue!.alarms.find((a) => a.key === 'function-check-overdue')).toMatchObject({ kind: 'analyzer', active: true, state: 'active-unacknowledged', priority: 1 });
    expect(sig.analyzer).toBe('good');
    expect(sig.alarms.find((a) => a.key === 'function-check-overdue')).toMatchObject({ active: false, state: 'cleared-unacknowledged' });
    p.close();
  }, 120_000);

  it('a new function check counts afresh, and batch end clears an overdue alarm', async () => {
    const { clock, viewer, ts } = await serverWithModel({ staleAfterMs: MIN, functionCheckMaxMs: 5 * MIN });
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    let seq = await fouledInFunctionCheck(p, 'fc-2');
    clock.offset += 6 * MIN;
    const first = await waitAlarm(viewer, 'fc-2', (a) => a.key === 'function-check-overdue' && a.active, 'overdue');
    expect(first.limit).toBe(5);
    p.send({ type: 'analyzer-status', seq: seq++, t: batch.times[8]! + 2, status: 'good' });
    p.send({ type: 'analyzer-status', seq: seq++, t: batch.times[8]! + 3, status: 'function-check', code: 'probe-cleaning' });
    // one more spectrum ends the silence (the stale condition clears)
    p.send({ type: 'spectrum', seq: seq++, t: batch.times[9]!, values: Array.from(batch.spectra[9]!, (x, k) => x + 0.3 + 0.0005 * k) });
    await p.waitAck(seq - 1);
    expect((await alarmsOf(viewer, 'fc-2')).find((a) => a.id === first.id)).toMatchObject({ active: false, state: 'cleared-unacknowledged' });
    // function check again, 2 min on the server clock: a tick raises the stale condition anew, suppressed
    // by function-check; the same tick found the new function check (2 min) within the limit (5 min)
    clock.offset += 2 * MIN;
    await waitAlarm(viewer, 'fc-2', (a) => a.kind === 'stale' && a.active, 'stale again');
    const within = await alarmsOf(viewer, 'fc-2');
    expect(within.find((a) => a.kind === 'stale' && a.active)).toMatchObject({ state: 'normal', suppressedBy: ['function-check'] });
    expect(within.find((a) => a.id === first.id)).toMatchObject({ active: false });
    clock.offset += 4 * MIN;
    const again = await waitAlarm(viewer, 'fc-2', (a) => a.key === 'function-check-overdue' && a.active, 'overdue again');
    expect(again.value).toBeGreaterThanOrEqual(6);
    expect(again.value).toBeLessThan(7);
    p.send({ type: 'batch-end', seq: seq++, t: batch.times[9]! + 1, batch: 'fc-2' });
    await p.waitAck(seq - 1);
    const ended = (await (await login(ts, 'viewer')).get('/api/alarms?batch=fc-2')).body.items.find((a: any) => a.key === 'function-check-overdue');
    expect(ended).toMatchObject({ active: false, state: 'cleared-unacknowledged' });
    expect(ended.message).toBe('function check of analyzer nir-1 over: batch fc-2 ended');
    p.close();
  }, 120_000);

  it('with functionCheckMaxMs 0 (no limit, not recommended) the suppression stays', async () => {
    const { clock, viewer, ts } = await serverWithModel({ staleAfterMs: MIN, functionCheckMaxMs: 0 });
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    await fouledInFunctionCheck(p, 'fc-3');
    clock.offset += 2 * 3600_000; // far beyond the 15 min default (sessions last 8 h idle)
    // the stale condition is raised by a tick at the advanced clock; the same tick checked the limit
    await waitAlarm(viewer, 'fc-3', (a) => a.kind === 'stale' && a.active, 'stale');
    const all = await alarmsOf(viewer, 'fc-3');
    expect(all.some((a) => a.key === 'function-check-overdue')).toBe(false);
    const suppressed = all.filter((a) => a.active && a.kind !== 'analyzer');
    expect(suppressed.length).toBeGreaterThan(1);
    for (const a of suppressed) expect(a).toMatchObject({ state: 'normal', suppressedBy: ['function-check'] });
    p.close();
  }, 120_000);

  it('after a restart the overdue alarm and the lapse of the suppression stand until the analyzer reports good', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'tideline-fc-'));
    dirs.push(dir);
    const first = await serverWithModel({ staleAfterMs: MIN }, { dir });
    const p = new Peer(first.ts.wsUrl, first.ts.token);
    await p.open();
    let seq = await fouledInFunctionCheck(p, 'fc-4');
    first.clock.offset += 16 * MIN;
    const overdue = await waitAlarm(first.viewer, 'fc-4', (a) => a.key === 'function-check-overdue' && a.active, 'overdue');
    p.close();
    servers.splice(servers.indexOf(first.ts), 1);
    await first.ts.stop();
    const overdueRows = (ts: TestServer) =>
      sqliteDb(ts.server.ctx.storage)
        .prepare(`SELECT payload FROM outbox WHERE unit = 'dryer-1' AND type = 'alarm'`)
        .all()
        .map((r) => JSON.parse((r as { payload: string }).payload).alarm)
        .filter((a) => a.key === 'function-check-overdue');

    const second = await serverWithModel({ staleAfterMs: MIN }, { dir, restart: first.clock });
    expect(overdueRows(second.ts)).toHaveLength(1);
    expect((await second.viewer.get('/api/units/dryer-1')).body).toMatchObject({ suppression: [], analyzerStatus: { status: 'function-check' } });
    const q = new Peer(second.ts.wsUrl, second.ts.token);
    await q.open();
    await q.hello('nir-1', 1, batch.axis);
    // a spectrum ends the silence; 2 min later a tick raises the stale condition again, annunciated
    // (not suppressed), and the same tick leaves the standing overdue alarm as it is
    q.send({ type: 'spectrum', seq: seq++, t: batch.times[9]!, values: Array.from(batch.spectra[9]!, (x, k) => x + 0.3 + 0.0005 * k) });
    await q.waitAck(seq - 1);
    second.clock.offset += 2 * MIN;
    const stale = await waitAlarm(second.viewer, 'fc-4', (a) => a.kind === 'stale' && a.active, 'stale after restart');
    expect(stale).toMatchObject({ state: 'active-unacknowledged', suppressedBy: [] });
    expect(overdueRows(second.ts)).toHaveLength(1);
    expect((await alarmsOf(second.viewer, 'fc-4')).find((a) => a.id === overdue.id)).toMatchObject({ active: true, state: 'active-unacknowledged' });
    q.send({ type: 'analyzer-status', seq: seq++, t: batch.times[9]! + 1, status: 'good' });
    await q.waitAck(seq - 1);
    expect((await alarmsOf(second.viewer, 'fc-4')).find((a) => a.id === overdue.id)).toMatchObject({ active: false, state: 'cleared-unacknowledged' });
    q.close();
  }, 120_000);
});
