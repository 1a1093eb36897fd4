/**
 * Model health on the demo's own kind of model, through the public paths: 30 simulated dryer
 * reference batches streamed over /ingest, their lab results (LOD, a few per batch) attached over
 * REST, the model built by the service the build route uses with the demo's settings (alarms at
 * 99.9 % per-point limits after 2 min of start-up), approved and deployed as the demo does; then 20
 * good batches and a lot that drifts, streamed over /ingest, health read over REST, the health alarm
 * from the alarm list.
 *
 * Good batches: no rate test fails and no health alarm stands, although some of their spectra lie
 * beyond the monitor's alarm limits (observed: a few of the 20 batches carry them all — the reason
 * the rate test counts batches). The lot whose component bands shift 0.5 nm further with every batch
 * (the simulator's wrong-material fault at a growing shift, as in model-health-drift.test.ts) turns
 * the health alarm on within 12 batches (observed: see the figures printed).
 *
 * Monte Carlo tolerance: one 20-batch window, so this checks one draw; the unit Monte Carlo of the
 * batch test is in test/health/model-health.test.ts.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch, simulateReferenceSet, type SimulatedBatch } from '../../simulators/batch.ts';
import { drawLabSamples, LAB_METHODS } from '../../simulators/lab-samples.ts';
import { deriveSeed, Rng } from '../../simulators/prng.ts';
import { defaultBuildSettings } from '../../core/model/default-settings.ts';
import { buildFromStored } from '../../server/models/model-service.ts';
import { modelLifeOf } from '../../server/model-life/service.ts';
import { Peer, login, startTestServer, type Session, type TestServer } from './helpers.ts';

const DAY = 86_400_000;
const REF_SEED = 4201;
const INTERVAL_S = 30;
const GOOD = 20;
const DRIFTING = 12;
let ts: TestServer;
let viewer: Session;
let versionId: string;
let peer: Peer;
let seq = 0;

async function send(b: SimulatedBatch, shift: number) {
  peer.send({ type: 'batch-start', seq: seq++, t: b.start + shift, unit: 'dryer-1', batch: b.id, product: 'granule A' });
  for (let i = 0; i < b.spectra.length; i++) peer.sendFrame(seq++, b.times[i]! + shift, Float32Array.from(b.spectra[i]!));
  peer.send({ type: 'batch-end', seq: seq++, t: b.times[b.times.length - 1]! + shift + 1, batch: b.id, reason: 'discharged' });
  await peer.waitAck(seq - 1, 120_000);
}

async function healthAlarm(): Promise<{ active: boolean; message: string; value: number | null; limit: number | null; priority: number } | undefined> {
  await modelLifeOf(ts.server.ctx).drain();
  return (await viewer.get('/api/alarms?unit=dryer-1&limit=500')).body.items.find((a: { kind: string; active: boolean }) => a.kind === 'model-health' && a.active);
}

beforeAll(async () => {
  ts = await startTestServer({}, { units: ['dryer-1'] });
  const ctx = ts.server.ctx;
  peer = new Peer(ts.wsUrl, ts.token);
  await peer.open();
  const refs = simulateReferenceSet('dryer', 30, REF_SEED, { intervalS: INTERVAL_S, unit: 'dryer-1', product: 'granule A' });
  await peer.hello('nir-1', 1, refs[0]!.axis);
  for (const r of refs) await send(r, 0);
  const owner = await login(ts, 'operator');
  const m = LAB_METHODS.dryer;
  for (const b of refs) {
    for (const l of drawLabSamples(b, new Rng(deriveSeed(REF_SEED, `lab:${b.id}`)))) {
      const r = await owner.post(`/api/batches/${encodeURIComponent(b.id)}/lab-values`, { property: m.property, value: l.value, unit: m.unit, sampleT: l.sampleT, method: m.method });
      expect(r.status, JSON.stringify(r.body)).toBe(201);
    }
  }
  const { name: _n, product: _p, author: _a, createdAt: _c, ...settings } = defaultBuildSettings('dryer', { name: 'x', author: 'x' });
  const row = await buildFromStored(ctx, { name: 'dryer-granule-A', product: 'granule A', referenceBatches: refs.map((b) => b.id), settings: settings as unknown as Record<string, unknown> }, 'test');
  versionId = row.id;
  await ctx.storage.approveModelVersion(row.id, 'test', ctx.now(), 'test: approved as the demo does');
  await ctx.storage.deploy({ id: 'dep-1', unit: 'dryer-1', modelVersion: row.id, deployedAt: ctx.now(), deployedBy: 'test', reason: 'test', endedAt: null });
  await ctx.ingest.refreshDeployment('dryer-1');
  viewer = await login(ts, 'viewer');
}, 900_000);

afterAll(async () => {
  peer?.close();
  await ts?.stop();
});

describe('model health on good batches and on a drifting lot (demo-shaped model)', () => {
  it('stays quiet on good batches, whose few spectra beyond the limits come in a few batches; the drifting lot raises the health alarm', async () => {
    const rows: string[] = [];
    const failing: string[][] = [];
    let h: any;
    for (let k = 0; k < GOOD + DRIFTING; k++) {
      const j = k - GOOD + 1;
      const faults = j > 0 ? [{ type: 'wrong-material' as const, onsetS: 0, params: { shiftNm: 0.5 * j, level: 0 } }] : [];
      await send(simulateDryerBatch({ seed: deriveSeed(9100, k), id: `h-${k}`, intervalS: INTERVAL_S, faults }), (k + 1) * DAY);
      h = (await viewer.get(`/api/models/versions/${versionId}/health`)).body;
      const bad = h.tests.filter((t: { failed: boolean }) => t.failed).map((t: { code: string }) => t.code);
      failing.push(bad);
      rows.push(`${k < GOOD ? 'good' : `drift ${0.5 * j} nm`}: T² ${h.t2.beyond}/${h.t2.points} spectra, ${h.t2.batches.left}/${h.t2.batches.of} batches; Q ${h.q.beyond}/${h.q.points} spectra (${(100 * h.q.rate).toFixed(2)} %), ${h.q.batches.left}/${h.q.batches.of} batches; failing: ${bad.join(', ') || '—'}`);
      if (k === GOOD - 1) {
        // After the good batches: every test passes, no health alarm stands.
        expect(h.t2.batches.baseline.source).toBe('reference');
        expect(h.t2.batches.baseline.of).toBe(30);
        expect(h.t2.startupMin).toBe(2);
        expect(h.t2.confidence).toBe(0.999);
        expect(await healthAlarm()).toBeUndefined();
      }
    }
    console.log(rows.join('\n'));
    expect(failing.slice(0, GOOD)).toEqual(new Array(GOOD).fill([]));
    const on = failing.findIndex((f) => f.length > 0);
    expect(on).toBeGreaterThanOrEqual(GOOD);
    expect(on - GOOD + 1).toBeLessThanOrEqual(12);
    const alarm = await healthAlarm();
    expect(alarm?.priority).toBe(4);
    // Value and limit of the first failing test, in its own unit (named in the message), never "limit 0".
    const first = h.tests.find((t: { failed: boolean; limit?: number | null }) => t.failed && t.limit != null);
    expect(alarm!.message).toContain(first.code);
    expect(alarm!.limit).toBeGreaterThan(0);
  }, 900_000);
});
