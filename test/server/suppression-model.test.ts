/**
 * Suppression by state with a real monitoring model (ANSI/ISA-18.2-2016 designed suppression):
 * out-of-model spectra while the analyzer reports NAMUR NE 107 function check raise no annunciated
 * alarm (the condition is tracked, state normal, reason function-check); when the analyzer reports
 * good again, the still-present condition is annunciated (active-unacknowledged).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch } from '../../simulators/batch.ts';
import { Peer, login, startTestServer, type Session, type TestServer, sqliteDb } from './helpers.ts';
import { buildSmallDryerModel, installModel } from './model-fixture.ts';

let ts: TestServer;
let viewer: Session;
const batch = simulateDryerBatch({ seed: 5, id: 'sim', intervalS: 60 });
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

describe('suppression by state with a model', () => {
  it('an out-of-limit spectrum in function check raises no active alarm; after good it does', async () => {
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    await p.hello('nir-1', 1, batch.axis);
    const t = (i: number) => batch.times[i]!;
    p.send({ type: 'batch-start', seq: 0, t: batch.start, unit: 'dryer-1', batch: 'sup-1', product: 'granule A' });
    let seq = 1;
    for (let i = 0; i < 3; i++) p.send({ type: 'spectrum', seq: seq++, t: t(i), values: Array.from(batch.spectra[i]!) });
    p.send({ type: 'analyzer-status', seq: seq++, t: t(2) + 1, status: 'function-check', code: 'probe-cleaning' });
    // a fouled window: a strong baseline offset and slope, far outside the model
    for (let i = 3; i < 9; i++) {
      const v = Array.from(batch.spectra[i]!, (x, k) => x + 0.3 + 0.0005 * k);
      p.send({ type: 'spectrum', seq: seq++, t: t(i), values: v });
    }
    await p.waitAck(seq - 1);
    const alarms = async () => (await viewer.get('/api/alarms?batch=sup-1')).body.items as any[];
    const model = (await alarms()).filter((a) => ['t2', 'q', 'combined', 'envelope', 'property'].includes(a.kind) && a.active);
    expect(model.length).toBeGreaterThan(0);
    for (const a of model) expect(a).toMatchObject({ state: 'normal', suppressedBy: ['function-check'] });
    expect((await viewer.get('/api/units/dryer-1')).body.activeAlarms).toBe(0);

    p.send({ type: 'analyzer-status', seq: seq++, t: t(8) + 1, status: 'good' });
    const v = Array.from(batch.spectra[9]!, (x, k) => x + 0.3 + 0.0005 * k);
    p.send({ type: 'spectrum', seq: seq++, t: t(9), values: v });
    await p.waitAck(seq - 1);
    const after = (await alarms()).filter((a) => model.some((m) => m.id === a.id));
    expect(after.some((a) => a.state === 'active-unacknowledged' && a.active && a.suppressedBy.length === 0)).toBe(true);
    expect((await viewer.get('/api/units/dryer-1')).body.activeAlarms).toBeGreaterThan(0);

    // outbox: the monitor's raw 'condition' rows carry the suppression by state of their moment, as the
    // 'alarm' rows do — function-check between the two analyzer-status rows, none before and after
    const rows = sqliteDb(ts.server.ctx.storage)
      .prepare(`SELECT unit_seq, type, payload FROM outbox WHERE unit = 'dryer-1' ORDER BY unit_seq`)
      .all() as { unit_seq: number; type: string; payload: string }[];
    const statusAt = rows.filter((r) => r.type === 'analyzer-status').map((r) => [r.unit_seq, JSON.parse(r.payload).status]);
    expect(statusAt.map((x) => x[1])).toEqual(['function-check', 'good']);
    const [fcFrom, goodFrom] = statusAt.map((x) => x[0] as number);
    const conditions = rows.filter((r) => r.type === 'condition').map((r) => ({ at: r.unit_seq, ...JSON.parse(r.payload) }));
    const during = conditions.filter((c) => c.at > fcFrom! && c.at < goodFrom!);
    expect(during.filter((c) => c.change.active).length).toBeGreaterThan(0);
    for (const c of during) expect(c.suppressedBy).toEqual(['function-check']);
    for (const c of conditions.filter((c) => c.at < fcFrom! || c.at > goodFrom!)) expect(c.suppressedBy).toEqual([]);
    const alarmRows = rows.filter((r) => r.type === 'alarm' && r.unit_seq > fcFrom! && r.unit_seq < goodFrom!).map((r) => JSON.parse(r.payload).alarm);
    for (const a of alarmRows.filter((a) => a.kind !== 'analyzer')) expect(a.suppressedBy).toEqual(['function-check']);
    p.close();
  }, 120_000);
});
