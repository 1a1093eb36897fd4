/**
 * Applies the numbered SQL migrations in server/storage/migrations/ (NNN_name.sql) in order and
 * records each in `schema_migrations`. Every part of the server has its own number range
 * (D 001–099, F 100–199, G 200–299, H 300–399); all are applied here.
 */
import { createHash } from 'node:crypto';
import { readdirSync, readFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import type Database from 'better-sqlite3';

export const MIGRATIONS_DIR = join(dirname(fileURLToPath(import.meta.url)), 'migrations');

export interface MigrationFile {
  number: number;
  name: string;
  sql: string;
}

export function readMigrations(dir = MIGRATIONS_DIR): MigrationFile[] {
  const files = readdirSync(dir).filter((f) => f.endsWith('.sql'));
  const out: MigrationFile[] = [];
  const seen = new Map<number, string>();
  for (const f of files) {
    const m = /^(\d{3})[-_][A-Za-z0-9_-]+\.sql$/.exec(f);
    if (!m) throw new Error(`migration file name "${f}" must look like 001_name.sql or 001-name.sql`);
    const number = Number(m[1]);
    if (seen.has(number)) throw new Error(`migrations "${seen.get(number)}" and "${f}" share number ${m[1]}`);
    seen.set(number, f);
    out.push({ number, name: f, sql: readFileSync(join(dir, f), 'utf8') });
  }
  return out.sort((a, b) => a.number - b.number);
}

/** Applies pending migrations; returns the names applied now. */
export function migrate(db: Database.Database, dir = MIGRATIONS_DIR): string[] {
  db.exec(`CREATE TABLE IF NOT EXISTS schema_migrations (
    name TEXT PRIMARY KEY, number INTEGER NOT NULL UNIQUE, sha256 TEXT NOT NULL, applied_at INTEGER NOT NULL)`);
  const done = new Set((db.prepare('SELECT name FROM schema_migrations').all() as { name: string }[]).map((r) => r.name));
  const applied: string[] = [];
  for (const m of readMigrations(dir)) {
    if (done.has(m.name)) continue;
    const sha = createHash('sha256').update(m.sql).digest('hex');
    const run = db.transaction(() => {
      db.exec(m.sql);
      db.prepare('INSERT INTO schema_migrations (name, number, sha256, applied_at) VALUES (?, ?, ?, ?)').run(m.name, m.number, sha, Date.now());
    });
    try {
      run();
    } catch (e) {
      throw new Error(`migration ${m.name} failed: ${(e as Error).message}`);
    }
    applied.push(m.name);
  }
  return applied;
}
