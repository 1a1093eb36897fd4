/**
 * Analyzer status (NAMUR NE 107 status signals) on the ingest protocol, and suppression by state
 * (ANSI/ISA-18.2-2016 designed suppression): while the analyzer reports function check, the
 * stale-data alarm of its unit is suppressed (state normal, reason shown, condition tracked); when the
 * analyzer reports good again, the still-present condition is annunciated afresh.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { parseAnalyzerText, IngestProtocolError } from '../../core/protocol/ingest-messages.ts';
import { Peer, axis, login, spectrum, startTestServer, type TestServer, sqliteDb, analyzerToken } from './helpers.ts';

const dir = mkdtempSync(join(tmpdir(), 'tideline-status-'));
let ts: TestServer | null = null;
afterAll(async () => {
  await ts?.stop();
  rmSync(dir, { recursive: true, force: true });
});

describe('analyzer-status message', () => {
  it('validates the NE 107 category and names the problem', () => {
    const ok = parseAnalyzerText(JSON.stringify({ type: 'analyzer-status', seq: 3, t: 1000, status: 'function-check', code: 'probe-cleaning' }));
    expect(ok).toMatchObject({ type: 'analyzer-status', seq: 3, status: 'function-check', code: 'probe-cleaning' });
    const bad = (m: unknown) => {
      try {
        parseAnalyzerText(JSON.stringify(m));
      } catch (e) {
        return e as IngestProtocolError;
      }
      throw new Error('accepted a bad message');
    };
    const e1 = bad({ type: 'analyzer-status', seq: 3, t: 1000, status: 'ok' });
    expect(e1.code).toBe('bad-message');
    expect(e1.message).toMatch(/^status: /);
    expect(e1.message).toMatch(/function-check/);
    expect(e1.seq).toBe(3);
    expect(bad({ type: 'analyzer-status', seq: 3, status: 'good' }).message).toMatch(/^t: /);
    expect(bad({ type: 'analyzer-status', seq: 3, t: 1, status: 'good', code: '' }).message).toMatch(/^code: /);
  });
});

describe('analyzer status on a live server', () => {
  it('is acked, stored, sent to the outbox, suppresses the stale alarm in function check, and survives a restart', async () => {
    ts = await startTestServer({ ingest: { staleAfterMs: 300 } }, { dir, units: ['dryer-1'] });
    const viewer = await login(ts, 'viewer');
    const p = new Peer(ts.wsUrl, ts.token);
    await p.open();
    const ax = axis(50);
    await p.hello('nir-1', 5, ax);
    const t0 = Date.parse('2026-01-05T08:00:00Z');
    p.send({ type: 'analyzer-status', seq: 0, t: t0, status: 'good', unit: 'nope' });
    expect((await p.waitError('unknown-unit')).message).toMatch(/unit "nope" is not known/);
    p.send({ type: 'batch-start', seq: 1, t: t0, unit: 'dryer-1', batch: 'st-1', product: 'granule A' });
    p.send({ type: 'spectrum', seq: 2, t: t0 + 1000, values: spectrum(50, 0) });
    p.send({ type: 'analyzer-status', seq: 3, t: t0 + 2000, status: 'function-check', code: 'probe-cleaning', detail: 'window wash' });
    await p.waitAck(3);

    const alarm = async (pred: (a: any) => boolean, what: string) => {
      for (let i = 0; i < 400; i++) {
        const a = (await viewer.get('/api/alarms?batch=st-1')).body.items.find((x: any) => x.kind === 'stale');
        if (a && pred(a)) return a;
        await new Promise((r) => setTimeout(r, 25));
      }
      throw new Error(`no stale alarm ${what}`);
    };
    // the analyzer falls silent during the probe cleaning: the condition is tracked but suppressed
    const hidden = await alarm((a) => a.active, 'active');
    expect(hidden).toMatchObject({ state: 'normal', active: true, suppressedBy: ['function-check'] });
    let unit = (await viewer.get('/api/units/dryer-1')).body;
    expect(unit.analyzerStatus).toMatchObject({ analyzer: 'nir-1', status: 'function-check', code: 'probe-cleaning', detail: 'window wash', t: t0 + 2000 });
    expect(unit.suppression).toEqual(['function-check']);
    expect(unit.activeAlarms).toBe(0);

    // back to good while still silent: the stale alarm is annunciated now
    p.send({ type: 'analyzer-status', seq: 4, t: t0 + 3000, status: 'good' });
    await p.waitAck(4);
    const shown = await alarm((a) => a.state === 'active-unacknowledged', 'annunciated');
    expect(shown.suppressedBy).toEqual([]);
    unit = (await viewer.get('/api/units/dryer-1')).body;
    expect(unit.analyzerStatus.status).toBe('good');
    expect(unit.activeAlarms).toBe(1);

    // outbox: two status events in the unit's sequence; alarm rows carry the suppression
    const db = sqliteDb(ts.server.ctx.storage);
    const rows = db.prepare(`SELECT type, payload FROM outbox WHERE unit = 'dryer-1' ORDER BY unit_seq`).all() as { type: string; payload: string }[];
    const statuses = rows.filter((r) => r.type === 'analyzer-status').map((r) => JSON.parse(r.payload));
    expect(statuses.map((s) => [s.status, s.previous, s.batch])).toEqual([['function-check', null, 'st-1'], ['good', 'function-check', 'st-1']]);
    const staleRows = rows.filter((r) => r.type === 'alarm').map((r) => JSON.parse(r.payload).alarm).filter((a) => a.kind === 'stale');
    expect(staleRows.some((a) => a.active && a.state === 'normal' && a.suppressedBy[0] === 'function-check')).toBe(true);
    expect(staleRows.at(-1)).toMatchObject({ state: 'active-unacknowledged', suppressedBy: [] });
    // audit trail: the server recorded the release (the alarm was raised already suppressed)
    const admin = await login(ts, 'administrator');
    const audit = JSON.stringify((await admin.get('/api/audit?action=alarm.unsuppress')).body);
    expect(audit).toContain(`alarm:${shown.id}`);
    expect(audit).toContain('analyzer nir-1 reports good');

    // failure: analyzer alarm; then restart: the last status is known again
    p.send({ type: 'analyzer-status', seq: 5, t: t0 + 4000, status: 'failure', code: 'E17', detail: 'lamp' });
    await p.waitAck(5);
    const failure = (await viewer.get('/api/alarms?unit=dryer-1')).body.items.find((x: any) => x.key === 'analyzer-failure:nir-1');
    expect(failure).toMatchObject({ kind: 'analyzer', active: true, state: 'active-unacknowledged' });
    expect(failure.message).toMatch(/E17: lamp/);
    p.close();
    await ts.stop();
    ts = await startTestServer({ ingest: { staleAfterMs: 300 } }, { dir, units: ['dryer-1'] });
    const v2 = await login(ts, 'viewer');
    unit = (await v2.get('/api/units/dryer-1')).body;
    expect(unit.analyzerStatus).toMatchObject({ status: 'failure', code: 'E17', detail: 'lamp' });
    const stored = sqliteDb(ts.server.ctx.storage).prepare('SELECT seq, status FROM analyzer_status ORDER BY id').all();
    expect(stored).toEqual([{ seq: 3, status: 'function-check' }, { seq: 4, status: 'good' }, { seq: 5, status: 'failure' }]);
  }, 120_000);
});

describe('failure alarms are per analyzer and per unit', () => {
  it('a failing analyzer reporting for another unit raises it there; another analyzer never clears it', async () => {
    const t2 = await startTestServer({}, { units: ['dryer-1', 'dryer-2'] });
    try {
      const tok2 = await analyzerToken(t2.server.ctx.storage, 'nir-2');
      const viewer = await login(t2, 'viewer');
      const failureOn = async (unit: string, analyzer: string) =>
        (await viewer.get(`/api/alarms?unit=${unit}`)).body.items.find((x: any) => x.key === `analyzer-failure:${analyzer}`) ?? null;
      const t0 = Date.now() - 60_000;
      const a = new Peer(t2.wsUrl, t2.token);
      await a.open();
      await a.hello('nir-1', 1, axis(16));
      a.send({ type: 'analyzer-status', seq: 0, t: t0, status: 'failure', code: 'E17', unit: 'dryer-1' });
      await a.waitAck(0);
      expect(await failureOn('dryer-1', 'nir-1')).toMatchObject({ active: true, state: 'active-unacknowledged' });
      // still failing, it now reports for dryer-2: raised there too (its status did not change)
      a.send({ type: 'analyzer-status', seq: 1, t: t0 + 1000, status: 'failure', code: 'E17', unit: 'dryer-2' });
      await a.waitAck(1);
      expect(await failureOn('dryer-2', 'nir-1')).toMatchObject({ active: true, state: 'active-unacknowledged' });
      // another analyzer, no batch anywhere, reports good for dryer-1: nir-1's alarm stands
      const b = new Peer(t2.wsUrl, tok2);
      await b.open();
      await b.hello('nir-2', 1, axis(16));
      b.send({ type: 'analyzer-status', seq: 0, t: t0 + 2000, status: 'good', unit: 'dryer-1' });
      await b.waitAck(0);
      expect(await failureOn('dryer-1', 'nir-1')).toMatchObject({ active: true });
      expect(await failureOn('dryer-1', 'nir-2')).toBeNull();
      // nir-1 itself reports good for dryer-1: cleared there (returned unacknowledged), dryer-2's stands
      a.send({ type: 'analyzer-status', seq: 2, t: t0 + 3000, status: 'good', unit: 'dryer-1' });
      await a.waitAck(2);
      expect(await failureOn('dryer-1', 'nir-1')).toMatchObject({ active: false, state: 'cleared-unacknowledged' });
      expect(await failureOn('dryer-2', 'nir-1')).toMatchObject({ active: true });
      a.close();
      b.close();
    } finally {
      await t2.stop();
    }
  }, 120_000);
});
