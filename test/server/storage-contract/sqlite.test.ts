/**
 * The storage contract on the embedded SQLite backend (a file in a temporary folder, WAL,
 * synchronous=FULL as the server runs it), and what only SQLite must add: a unit of work that
 * yields to the event loop is refused, since other writes on the one connection could join it.
 */
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { SqliteStorage } from '../../../server/storage/sqlite-storage.ts';
import { authContract, modelLifeContract, signalContract, storageContract } from './contract.ts';

const open = async () => new SqliteStorage({ file: join(mkdtempSync(join(tmpdir(), 'tideline-contract-')), 'tideline.db'), checkpointInWorker: false });

storageContract('SQLite', { open });
authContract('SQLite', { open });
signalContract('SQLite', { open });
modelLifeContract('SQLite', { open });

describe('SQLite units of work', () => {
  it('keeps the durable settings: WAL and synchronous=FULL', async () => {
    const st = await open();
    try {
      expect(st.db.pragma('journal_mode', { simple: true })).toBe('wal');
      expect(st.db.pragma('synchronous', { simple: true })).toBe(2); // 2 = FULL (sqlite.org/pragma.html#pragma_synchronous)
    } finally {
      await st.close();
    }
  });

  it('a unit that awaits real I/O is rolled back and refused', async () => {
    const st = await open();
    try {
      await expect(
        st.unitOfWork(async (u) => {
          await u.audit.append({ seq: 1, at: '2026-01-05T08:00:00.000Z', user: 'a', action: 'x.y', object: 'o:1', before: null, after: null, reason: null, prevHash: '0'.repeat(64), hash: '1'.repeat(64) });
          await new Promise((r) => setTimeout(r, 5));
        }),
      ).rejects.toThrow(/outside its repositories/);
      expect(await st.audit.count({})).toBe(0);
      expect(st.db.inTransaction).toBe(false);
    } finally {
      await st.close();
    }
  });
});
