/**
 * A shadow run across a server restart mid-batch, through the public paths: the run is started over
 * REST, a batch streams over /ingest, the server stops half-way and starts again on the same data
 * directory, the analyzer reconnects and resends from the position the server gives it (a few
 * already-stored spectra included). The candidate's results of that batch must continue: one per
 * spectrum, none lost, none twice, and each equal to an uninterrupted run of the candidate's own
 * monitor over the same spectra (core, float32 as sent) — the shadow monitor is rebuilt by replay, not
 * restarted from scratch (docs/model-life.md).
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { randomUUID } from 'node:crypto';
import { afterAll, describe, expect, it } from 'vitest';
import { simulateDryerBatch } from '../../simulators/batch.ts';
import { createBatchMonitor } from '../../core/monitor/batch-monitor.ts';
import { modelLifeOf } from '../../server/model-life/service.ts';
import { buildSmallDryerModel, installModel } from './model-fixture.ts';
import { Peer, login, startTestServer, type TestServer } from './helpers.ts';

const dir = mkdtempSync(join(tmpdir(), 'tideline-shadow-restart-'));
const servers: TestServer[] = [];

afterAll(async () => {
  for (const s of servers) await s.server.close().catch(() => undefined);
  rmSync(dir, { recursive: true, force: true });
});

describe('shadow run across a restart', () => {
  it('continues the candidate results of the open batch after a restart mid-batch: none lost, none twice, equal to an uninterrupted run', async () => {
    const first = await startTestServer({}, { dir, units: ['dryer-1'] });
    servers.push(first);
    const st = first.server.ctx.storage;
    const deployed = buildSmallDryerModel(11);
    await installModel(st, deployed.text, deployed.model, 'dryer-1');
    await first.server.ctx.ingest.refreshDeployment('dryer-1');
    const cand = buildSmallDryerModel(12);
    const candidateId = randomUUID();
    await st.insertModelVersion({
      id: candidateId, name: cand.model.settings.name, version: await st.nextModelVersion(cand.model.settings.name), product: cand.model.settings.product, sha256: cand.model.sha256,
      body: cand.text, settings: cand.model.settings as unknown as Record<string, unknown>, referenceBatches: cand.model.meta.batches.map((x) => x.id),
      components: cand.model.pca.nComponents, confidence: cand.model.settings.confidence, status: 'draft', createdAt: 0, createdBy: 'test',
      approvedAt: null, approvedBy: null, approvalReason: null, retiredAt: null, retiredBy: null, retireReason: null,
    });
    const owner = await login(first, 'model-owner');
    const started = await owner.post('/api/shadow-runs', { unit: 'dryer-1', versionId: candidateId, reason: 'prove v2 across a restart' });
    expect(started.status, JSON.stringify(started.body)).toBe(201);
    const runId = started.body.id as string;

    const b = simulateDryerBatch({ seed: 171, id: 'B-restart', intervalS: 60 });
    const n = b.spectra.length;
    const BOOT = 5;
    const sendFrom = (p: Peer, from: number, to = n + 1) => {
      for (let seq = from; seq <= to; seq++) {
        if (seq === 0) p.send({ type: 'batch-start', seq: 0, t: b.start, unit: 'dryer-1', batch: b.id, product: 'granule A' });
        else if (seq <= n) p.sendFrame(seq, b.times[seq - 1]!, Float32Array.from(b.spectra[seq - 1]!));
        else p.send({ type: 'batch-end', seq, t: b.times[n - 1]! + 1000, batch: b.id, reason: 'discharged' });
      }
    };
    const p = new Peer(first.wsUrl, first.token);
    await p.open();
    await p.hello('nir-1', BOOT, b.axis);
    const half = Math.floor(n / 2);
    sendFrom(p, 0, half);
    await p.waitAck(half, 60_000);
    // The server stops mid-batch and starts again on the same data directory.
    await first.server.close();
    await p.waitClose(30_000);
    const second = await startTestServer({}, { dir, units: ['dryer-1'] });
    servers.push(second);
    const q = new Peer(second.wsUrl, second.token);
    await q.open();
    const w = await q.hello('nir-1', BOOT, b.axis);
    expect(w.resumeAfter).toBe(half);
    // Resend a few spectra already stored (and judged in shadow) too: they must not be judged twice.
    sendFrom(q, half - 3);
    await q.waitAck(n + 1, 60_000);
    q.close();

    // No loss, no double: one candidate result per spectrum, in order.
    const shadow = await modelLifeOf(second.server.ctx).store.shadowResults(runId, b.id);
    expect(shadow.map((x) => x.result.seq)).toEqual(Array.from({ length: n }, (_, i) => i + 1));
    // Each equals an uninterrupted run of the candidate's monitor over the same spectra.
    const ref = createBatchMonitor(cand.model, b.start);
    for (let i = 0; i < n; i++) {
      const r = ref.push(i + 1, b.times[i]!, Float32Array.from(b.spectra[i]!));
      const s = shadow[i]!.result;
      expect({ seq: s.seq, t2: s.t2, q: s.q, progress: s.progress, endpoint: s.endpoint.state, active: s.activeConditions }).toEqual({ seq: r.seq, t2: r.t2, q: r.q, progress: r.progress, endpoint: r.endpoint.state, active: r.activeConditions });
    }
    // The comparison over REST counts the batch once, with every spectrum on both sides; the run is still active.
    const viewer = await login(second, 'viewer');
    const c = (await viewer.get(`/api/shadow-runs/${runId}/comparison`)).body;
    expect(c.batches.map((x: { batch: string }) => x.batch)).toEqual([b.id]);
    expect(c.batches[0].candidate.spectra).toBe(n);
    expect(c.batches[0].deployed.spectra).toBe(n);
    expect(c.run.endedAt).toBeNull();
  }, 300_000);
});
