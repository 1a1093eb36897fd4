/** A real SQLite storage in a temporary folder (every migration applied), for standalone auth and audit tests. */
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { SqliteStorage } from '../../server/storage/sqlite-storage.ts';

export function openTestDb(): { storage: SqliteStorage; db: SqliteStorage['db']; file: string } {
  const dir = mkdtempSync(join(tmpdir(), 'tideline-sec-'));
  const file = join(dir, 'test.sqlite');
  const storage = new SqliteStorage({ file, checkpointInWorker: false });
  return { storage, db: storage.db, file };
}
