import { mkdtempSync, readdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { MIGRATIONS_DIR } from '../../server/storage/migrate.ts';
import { SqliteStorage } from '../../server/storage/sqlite-storage.ts';
import { emptyIngestWrite } from '../../server/storage/storage.ts';

describe('SQLite storage', () => {
  it('applies every numbered migration once, in order, and records it', async () => {
    const file = join(mkdtempSync(join(tmpdir(), 'tideline-st-')), 't.db');
    const a = new SqliteStorage({ file, checkpointInWorker: false });
    const rows = a.db.prepare('SELECT name, number FROM schema_migrations ORDER BY number').all() as { name: string; number: number }[];
    const files = readdirSync(MIGRATIONS_DIR).filter((f) => f.endsWith('.sql')).sort();
    expect(rows.map((r) => r.name)).toEqual(files);
    expect(rows.map((r) => r.number)).toEqual([...rows.map((r) => r.number)].sort((x, y) => x - y));
    expect(a.db.pragma('journal_mode', { simple: true })).toBe('wal');
    expect(a.db.pragma('synchronous', { simple: true })).toBe(2); // FULL
    await a.close();
    const b = new SqliteStorage({ file, checkpointInWorker: false });
    expect((b.db.prepare('SELECT COUNT(*) AS n FROM schema_migrations').get() as { n: number }).n).toBe(files.length);
    await b.close();
  });

  it('stored spectra and model versions cannot be changed or deleted', async () => {
    const s = new SqliteStorage({ file: ':memory:' });
    await s.createUnit({ id: 'u', name: 'u', kind: 'dryer', description: '', createdAt: 0 });
    await s.createAnalyzer({ id: 'a', name: 'a', createdAt: 0 });
    await s.upsertAnalyzerBoot({ analyzer: 'a', boot: 1, axis: Float64Array.of(1, 2), instrument: null, firstSeen: 0, lastSeen: 0 });
    const w = emptyIngestWrite();
    w.batchStarts.push({ id: 'b', unit: 'u', analyzer: 'a', boot: 1, product: 'p', startSeq: 0, startT: 0, axis: Float64Array.of(1, 2), modelVersion: null, createdAt: 0 });
    w.spectra.push({ batch: 'b', idx: 0, seq: 1, t: 1, values: Float32Array.of(0.5, 0.25), analyzer: 'a', boot: 1, receivedAt: 0 });
    await s.commitIngest(w);
    expect(() => s.db.prepare('UPDATE spectra SET vals = ?').run(Buffer.alloc(8))).toThrow(/never changed/);
    expect(() => s.db.prepare('DELETE FROM spectra').run()).toThrow(/never deleted/);
    // The same (analyzer, boot, seq) cannot be stored twice, even by a faulty caller.
    const dup = emptyIngestWrite();
    dup.spectra.push({ batch: 'b', idx: 1, seq: 1, t: 2, values: Float32Array.of(1, 1), analyzer: 'a', boot: 1, receivedAt: 0 });
    await expect(s.commitIngest(dup)).rejects.toThrow(/UNIQUE/);
    expect((await s.readSpectra('b', 0, 10, 10)).map((x) => Array.from(x.values))).toEqual([[0.5, 0.25]]);
    await s.insertModelVersion({
      id: 'm1', name: 'm', version: 1, product: 'p', sha256: 'x'.repeat(64), body: '{}', settings: {}, referenceBatches: [], components: 2,
      confidence: 0.99, status: 'draft', createdAt: 0, createdBy: 't', approvedAt: null, approvedBy: null, approvalReason: null, retiredAt: null, retiredBy: null, retireReason: null,
    });
    expect(() => s.db.prepare(`UPDATE model_versions SET body = '{"x":1}'`).run()).toThrow(/immutable/);
    expect(() => s.db.prepare('DELETE FROM model_versions').run()).toThrow(/never deleted/);
    await s.approveModelVersion('m1', 't', 1, 'ok');
    await expect(s.approveModelVersion('m1', 't', 2, 'again')).rejects.toThrow(/not a draft/);
    await s.close();
  });
});
