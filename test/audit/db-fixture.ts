/** A real SQLite database with the auth and audit migrations (200–299) applied, for standalone tests. */
import Database from 'better-sqlite3';
import { mkdtempSync, readdirSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

export const MIGRATIONS_DIR = new URL('../../server/storage/migrations/', import.meta.url).pathname;

export function securityMigrationFiles(): string[] {
  return readdirSync(MIGRATIONS_DIR)
    .filter((f) => /^2\d\d-.*\.sql$/.test(f))
    .sort();
}

export function openTestDb(): { db: Database.Database; file: string } {
  const dir = mkdtempSync(join(tmpdir(), 'tideline-sec-'));
  const file = join(dir, 'test.sqlite');
  const db = new Database(file);
  db.pragma('journal_mode = WAL');
  db.pragma('foreign_keys = ON');
  for (const f of securityMigrationFiles()) db.exec(readFileSync(join(MIGRATIONS_DIR, f), 'utf8'));
  return { db, file };
}
