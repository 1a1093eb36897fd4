/**
 * Model health on a slow raw-material drift, through the public paths: the deployed version's
 * reference batches and then live batches streamed over /ingest by the simulator's dryer, health
 * read over REST, the health alarm from the alarm list. Good batches first, then a lot whose
 * component bands shift 0.5 nm further with every batch (the simulator's wrong-material fault at a
 * growing shift, no impurity band): the EWMA of the batch-mean scores (λ 0.2, L 3) stays quiet on the
 * good batches and turns the drift test and the unit's health alarm on within 12 batches of the onset
 * (each PC's chart at its Bonferroni width, core/health/model-health.ts).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch, simulateReferenceSet } from '../../simulators/batch.ts';
import { buildSmallDryerModel, installModel } from './model-fixture.ts';
import { Peer, login, startTestServer, type Session, type TestServer } from './helpers.ts';

const DAY = 86_400_000;
const GOOD = 8;
const DRIFTING = 12;
let ts: TestServer;
let viewer: Session;
let versionId: string;
let peer: Peer;
let seq = 0;

async function send(b: ReturnType<typeof simulateDryerBatch>, shift: number) {
  peer.send({ type: 'batch-start', seq: seq++, t: b.start + shift, unit: 'dryer-1', batch: b.id, product: 'granule A' });
  for (let i = 0; i < b.spectra.length; i++) peer.sendFrame(seq++, b.times[i]! + shift, Float32Array.from(b.spectra[i]!));
  peer.send({ type: 'batch-end', seq: seq++, t: b.times[b.times.length - 1]! + shift + 1, batch: b.id, reason: 'discharged' });
  await peer.waitAck(seq - 1, 60_000);
}

beforeAll(async () => {
  ts = await startTestServer({}, { units: ['dryer-1'] });
  const a = buildSmallDryerModel(11);
  peer = new Peer(ts.wsUrl, ts.token);
  await peer.open();
  const refs = simulateReferenceSet('dryer', 4, 11, { intervalS: 60 });
  await peer.hello('nir-1', 1, refs[0]!.axis);
  for (const r of refs) await send(r, 0);
  versionId = await installModel(ts.server.ctx.storage, a.text, a.model, 'dryer-1');
  await ts.server.ctx.ingest.refreshDeployment('dryer-1');
  viewer = await login(ts, 'viewer');
}, 120_000);

afterAll(async () => {
  peer?.close();
  await ts?.stop();
});

describe('model health on a slow raw-material drift', () => {
  it('stays quiet on good batches and turns drift and the health alarm on as the lot drifts', async () => {
    const drift: boolean[] = [];
    for (let k = 0; k < GOOD + DRIFTING; k++) {
      const j = k - GOOD + 1;
      const faults = j > 0 ? [{ type: 'wrong-material' as const, onsetS: 0, params: { shiftNm: 0.5 * j, level: 0 } }] : [];
      await send(simulateDryerBatch({ seed: 300 + k, id: `drift-${k}`, intervalS: 60, faults }), (k + 1) * DAY);
      const h = (await viewer.get(`/api/models/versions/${versionId}/health`)).body;
      expect(h.drift.baselineBatches).toBe(4);
      drift.push(h.drift.failed);
    }
    expect(drift.slice(0, GOOD)).toEqual(new Array(GOOD).fill(false));
    const on = drift.indexOf(true);
    console.log(`drift test on from drifting batch ${on - GOOD + 1}; failing at ${drift.filter(Boolean).length} of ${DRIFTING} drifting batch counts`);
    expect(on).toBeGreaterThanOrEqual(GOOD);
    expect(on - GOOD + 1).toBeLessThanOrEqual(12);
    expect(drift[drift.length - 1]).toBe(true);
    // The unit's health alarm (priority 4) names the drift test.
    let alarm: { priority: number; message: string; active: boolean } | undefined;
    for (let i = 0; i < 100; i++) {
      alarm = (await viewer.get('/api/alarms?unit=dryer-1&limit=200')).body.items.find((a: { kind: string; active: boolean }) => a.kind === 'model-health' && a.active);
      if (alarm && /drift/.test(alarm.message)) break;
      await new Promise((r) => setTimeout(r, 100));
    }
    expect(alarm?.priority).toBe(4);
    expect(alarm?.message).toMatch(/drift/);
  }, 600_000);
});
