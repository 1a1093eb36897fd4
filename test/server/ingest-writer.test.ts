import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import type { MonitorResult } from '../../core/monitor/types.ts';
import { SqliteStorage } from '../../server/storage/sqlite-storage.ts';
import { emptyIngestWrite } from '../../server/storage/storage.ts';

// The opt-in writer thread (SqliteOptions.ingestInWorker) must write exactly the rows the inline
// commit writes, refuse what the schema refuses, and be readable by the main connection at once.
describe('ingest commits in the writer thread', () => {
  it('stores spectra bit for bit and results, refuses duplicates, and the main connection reads them', async () => {
    const file = join(mkdtempSync(join(tmpdir(), 'tideline-iw-')), 't.db');
    const s = new SqliteStorage({ file, ingestInWorker: true });
    await s.createUnit({ id: 'u', name: 'u', kind: 'dryer', description: '', createdAt: 0 });
    await s.createAnalyzer({ id: 'a', name: 'a', createdAt: 0 });
    await s.upsertAnalyzerBoot({ analyzer: 'a', boot: 1, axis: Float64Array.of(1, 2, 3), instrument: null, firstSeen: 0, lastSeen: 0 });
    const vals = Float32Array.of(0.1, Math.PI, -1e-7);
    const result = { seq: 1, t: 5, t2: 1.25, q: 0.5, scores: [1, 2], limits: { t2: 9, q: 1, combined: 2, confidence: 0.99 } } as unknown as MonitorResult;
    const w = emptyIngestWrite();
    w.batchStarts.push({ id: 'b', unit: 'u', analyzer: 'a', boot: 1, product: 'p', startSeq: 0, startT: 0, axis: Float64Array.of(1, 2, 3), modelVersion: null, createdAt: 0 });
    w.spectra.push({ batch: 'b', idx: 0, seq: 1, t: 5, values: vals, analyzer: 'a', boot: 1, receivedAt: 7 });
    w.results.push({ batch: 'b', idx: 0, modelVersion: 'm', result });
    w.batchProgress.push({ batch: 'b', spectrumCount: 1, lastSeq: 1, lastT: 5, endpointState: 'running', endpointAt: null });
    w.outbox.push({ id: 'o1', unit: 'u', unitSeq: 1, type: 'batch-start', payload: { batch: 'b' }, createdAt: 0 });
    w.boots.push({ analyzer: 'a', boot: 1, lastSeq: 1, lastSeen: 9 });
    await s.commitIngest(w);
    const got = await s.readSpectra('b', 0, 10, 10);
    expect(got).toHaveLength(1);
    expect(Buffer.from(got[0]!.values.buffer).equals(Buffer.from(vals.buffer))).toBe(true);
    expect(await s.readResults('b', 0, 10, 10)).toEqual([result]);
    expect((await s.getBatch('b'))!.spectrumCount).toBe(1);
    expect((await s.getAnalyzerBoot('a', 1))!.lastSeq).toBe(1);
    expect((await s.maxOutboxSeqByUnit()).get('u')).toBe(1);
    // A faulty second write is refused whole by the schema (same analyzer, boot and seq).
    const dup = emptyIngestWrite();
    dup.spectra.push({ batch: 'b', idx: 1, seq: 1, t: 6, values: Float32Array.of(1, 1, 1), analyzer: 'a', boot: 1, receivedAt: 0 });
    dup.outbox.push({ id: 'o2', unit: 'u', unitSeq: 2, type: 'x', payload: {}, createdAt: 0 });
    await expect(s.commitIngest(dup)).rejects.toThrow(/UNIQUE/);
    expect((await s.maxOutboxSeqByUnit()).get('u')).toBe(1);
    await s.close();
    // Durable on disk: a fresh connection sees the same rows.
    const again = new SqliteStorage({ file, checkpointInWorker: false });
    expect(await again.resultCount('b')).toBe(1);
    await again.close();
  });
});
