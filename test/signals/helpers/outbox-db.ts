/**
 * A real SQLite database for signal tests: the outbox table exactly as in the contract
 * (server/storage/migrations/001_initial.sql) plus the signal migrations
 * 100–199 of server/storage/migrations.
 */
import Database from 'better-sqlite3';
import { randomUUID } from 'node:crypto';
import { mkdtempSync, readdirSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

const MIGRATIONS = join(import.meta.dirname, '../../../server/storage/migrations');

export const OUTBOX_DDL = `CREATE TABLE IF NOT EXISTS outbox (
  id TEXT PRIMARY KEY,
  unit TEXT NOT NULL,
  unit_seq INTEGER NOT NULL,
  type TEXT NOT NULL,
  payload TEXT NOT NULL,
  created_at INTEGER NOT NULL,
  UNIQUE (unit, unit_seq)
);`;

export function openSignalDb(file?: string): Database.Database {
  const path = file ?? join(mkdtempSync(join(tmpdir(), 'tideline-signals-')), 'test.db');
  const db = new Database(path);
  db.pragma('journal_mode = WAL');
  db.pragma('synchronous = FULL');
  db.exec(OUTBOX_DDL);
  for (const f of readdirSync(MIGRATIONS).filter((f) => /^1\d\d[-_].*\.sql$/.test(f)).sort()) {
    db.exec(readFileSync(join(MIGRATIONS, f), 'utf8'));
  }
  return db;
}

/** Append one event the way the server core does: next per-unit seq, uuid id, in one transaction. */
export function appendOutbox(db: Database.Database, unit: string, type: string, payload: unknown, createdAt: number): { id: string; seq: number } {
  return db.transaction(() => {
    const seq = ((db.prepare('SELECT MAX(unit_seq) AS m FROM outbox WHERE unit = ?').get(unit) as { m: number | null }).m ?? 0) + 1;
    const id = randomUUID();
    db.prepare('INSERT INTO outbox (id, unit, unit_seq, type, payload, created_at) VALUES (?, ?, ?, ?, ?, ?)').run(id, unit, seq, type, JSON.stringify(payload), createdAt);
    return { id, seq };
  })();
}
