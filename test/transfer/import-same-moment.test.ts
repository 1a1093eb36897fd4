/**
 * Two imports that start in the same millisecond (two command-line imports at once, two uploads):
 * both are stored whole. The import's entries are numbered (file-import, boot = start time, seq);
 * with the same start time the second clashed on seq and failed with a raw database error.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { SqliteStorage } from '../../server/storage/sqlite-storage.ts';
import { importBatches } from '../../server/transfer/import-batches.ts';

const dir = mkdtempSync(join(tmpdir(), 'tideline-import-clash-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const csv = (id: string) => `batch,time_s,1000,1010\n${id},0,0.1,0.2\n${id},10,0.15,0.25\n${id},20,0.2,0.3\n`;

describe('imports at the same moment', () => {
  it('both are stored, the second under the next boot number', async () => {
    const st = new SqliteStorage({ file: join(dir, 'tideline.db') });
    try {
      await st.createUnit({ id: 'dryer-1', name: 'dryer 1', kind: 'dryer', description: '', createdAt: 0 });
      const now = Date.UTC(2026, 0, 5, 8);
      const a = await importBatches(st, { files: [{ name: 'A.csv', content: csv('A-1') }], unit: 'dryer-1', product: 'p', user: 'u' }, now);
      const b = await importBatches(st, { files: [{ name: 'B.csv', content: csv('B-1') }], unit: 'dryer-1', product: 'p', user: 'u' }, now);
      expect(a.importId).toBe(now);
      expect(b.importId).toBe(now + 1);
      for (const id of ['A-1', 'B-1']) {
        expect(await st.getBatch(id)).toMatchObject({ status: 'ended', spectrumCount: 3 });
        expect((await st.readSpectra(id, 0, 1e9, 100)).map((s) => Array.from(s.values))).toEqual([[0.1, 0.2], [0.15, 0.25], [0.2, 0.3]].map((r) => r.map((v) => Math.fround(v))));
      }
    } finally {
      await st.close();
    }
  });
});
