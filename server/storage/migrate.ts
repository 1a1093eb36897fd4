/**
 * Applies the numbered SQL migrations in server/storage/migrations/ (NNN_name.sql) in order and
 * records each in `schema_migrations` with the SHA-256 of its file. Every part of the server has its
 * own number range (001–099 server core, 100–199 signals, 200–299 auth and audit, 300–399 transfer);
 * all are applied here.
 *
 * Before applying anything the database is checked against this version of Tideline (a refusal is
 * a StorageOpenError naming the file and what differs):
 * - its schema version (PRAGMA user_version: the number of migrations that had been applied when it
 *   was last opened) must not be higher than the number of migrations this version knows;
 * - every migration recorded in it must be one this version knows, applied from the same file
 *   (same checksum). A recorded migration without a checksum (a database from before checksums
 *   were kept) gets the checksum of this version's file;
 * - every table the applied migrations created must still be there.
 * Checksums are taken over the file with CRLF line ends read as LF, so a checkout with Windows line
 * ends matches one made on Linux.
 */
import { createHash } from 'node:crypto';
import { readdirSync, readFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import type Database from 'better-sqlite3';
import { recordHash } from '../audit/record-hash.ts';
import { StorageOpenError } from './open-check.ts';

export const MIGRATIONS_DIR = join(dirname(fileURLToPath(import.meta.url)), 'migrations');
const VERSION: string = (() => {
  try {
    return JSON.parse(readFileSync(join(dirname(fileURLToPath(import.meta.url)), '..', '..', 'package.json'), 'utf8')).version;
  } catch {
    return '?';
  }
})();

export interface MigrationFile {
  number: number;
  name: string;
  sql: string;
  sha256: string;
}

export function migrationChecksum(sql: string): string {
  return createHash('sha256').update(sql.replace(/\r\n/g, '\n')).digest('hex');
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
    const sql = readFileSync(join(dir, f), 'utf8');
    out.push({ number, name: f, sql, sha256: migrationChecksum(sql) });
  }
  return out.sort((a, b) => a.number - b.number);
}

/** The schema version this Tideline writes: the number of migrations it knows. */
export function schemaVersion(dir = MIGRATIONS_DIR): number {
  return readMigrations(dir).length;
}

/** Tables that exist after the given migrations ran, in order (CREATE TABLE, DROP TABLE, RENAME TO). */
export function tablesCreatedBy(migrations: MigrationFile[]): Map<string, string> {
  const tables = new Map<string, string>();
  for (const m of migrations) {
    const sql = m.sql.replace(/--[^\n]*/g, '');
    const re = /\bCREATE\s+TABLE\s+(?:IF\s+NOT\s+EXISTS\s+)?["`]?(\w+)["`]?|\bDROP\s+TABLE\s+(?:IF\s+EXISTS\s+)?["`]?(\w+)["`]?|\bALTER\s+TABLE\s+["`]?(\w+)["`]?\s+RENAME\s+TO\s+["`]?(\w+)["`]?/gi;
    for (const x of sql.matchAll(re)) {
      if (x[1]) tables.set(x[1], m.name);
      else if (x[2]) tables.delete(x[2]);
      else if (x[3] && x[4]) {
        tables.delete(x[3]);
        tables.set(x[4], m.name);
      }
    }
  }
  return tables;
}

interface AppliedRow {
  name: string;
  number: number;
  sha256: string | null;
}

/**
 * Refuses a database this version cannot safely run on (see the header); records missing
 * checksums. Changes nothing else.
 */
export function checkAppliedMigrations(db: Database.Database, file: string, known: MigrationFile[]): void {
  const ours = known.length;
  const version = db.pragma('user_version', { simple: true }) as number;
  if (version > ours) {
    throw new StorageOpenError(
      `database ${file} has schema version ${version}, but this Tideline (${VERSION}) knows schema versions up to ${ours}: it was written by a newer Tideline; start that version, or restore a backup made with this one`,
    );
  }
  const tables = (db.prepare(`SELECT name FROM sqlite_master WHERE type = 'table' AND name NOT LIKE 'sqlite_%'`).all() as { name: string }[]).map((r) => r.name);
  if (!tables.includes('schema_migrations')) {
    if (tables.length > 0) {
      const some = tables.slice(0, 5).join(', ') + (tables.length > 5 ? ', …' : '');
      throw new StorageOpenError(`database ${file} is an SQLite database but not a Tideline database (it has no schema_migrations table; its tables: ${some}); Tideline did not change it`);
    }
    return;
  }
  const cols = (db.prepare('PRAGMA table_info(schema_migrations)').all() as { name: string }[]).map((c) => c.name);
  if (!cols.includes('sha256')) db.exec('ALTER TABLE schema_migrations ADD COLUMN sha256 TEXT');
  const rows = db.prepare('SELECT name, number, sha256 FROM schema_migrations ORDER BY number').all() as AppliedRow[];
  const byName = new Map(known.map((m) => [m.name, m]));
  const fill = db.prepare('UPDATE schema_migrations SET sha256 = ? WHERE name = ?');
  for (const r of rows) {
    const m = byName.get(r.name);
    if (!m) {
      throw new StorageOpenError(
        `database ${file} has migration ${r.name} applied, which this Tideline (${VERSION}) does not know: it was written by a newer Tideline; start that version, or restore a backup made with this one`,
      );
    }
    if (r.sha256 === null || r.sha256 === '') {
      fill.run(m.sha256, r.name);
      continue;
    }
    if (r.sha256 !== m.sha256) {
      throw new StorageOpenError(
        `database ${file} has migration ${r.name} applied from a different file (checksum ${r.sha256.slice(0, 12)}…, this Tideline's file ${m.sha256.slice(0, 12)}…): it was written by another build of Tideline; start that build, or restore a backup made with this one`,
      );
    }
  }
  // Tables of the applied migrations that are gone: dropped outside Tideline.
  const applied = known.filter((m) => rows.some((r) => r.name === m.name));
  const present = new Set(tables);
  for (const [table, by] of tablesCreatedBy(applied)) {
    if (!present.has(table)) {
      throw new StorageOpenError(
        `database ${file} has no table ${table}, which migration ${by} created: it was dropped outside Tideline${table.startsWith('audit') ? ' (the audit trail cannot go on without it)' : ''}; restore the database from a backup`,
      );
    }
  }
}

/**
 * SQL functions the migrations may call (SQLite has no SHA-256 of its own): the audit record hash
 * exactly as server/audit seals a record, and ms since the epoch as UTC ISO 8601 with ms and 'Z'.
 */
function registerMigrationFunctions(db: Database.Database): void {
  db.function('tideline_iso_time', { deterministic: true }, (ms: unknown) => new Date(Number(ms)).toISOString());
  db.function('tideline_audit_hash', { deterministic: true }, (seq: unknown, at: unknown, user: unknown, action: unknown, object: unknown, before: unknown, after: unknown, reason: unknown, prevHash: unknown) =>
    recordHash({
      seq: Number(seq), at: String(at), user: String(user), action: String(action), object: String(object),
      before: before === null ? null : String(before), after: after === null ? null : String(after), reason: reason === null ? null : String(reason), prevHash: String(prevHash),
    }),
  );
}

/** Applies pending migrations after checking the database (see the header); returns the names applied now. */
export function migrate(db: Database.Database, dir = MIGRATIONS_DIR, file = db.name): string[] {
  const known = readMigrations(dir);
  registerMigrationFunctions(db);
  checkAppliedMigrations(db, file, known);
  db.exec(`CREATE TABLE IF NOT EXISTS schema_migrations (
    name TEXT PRIMARY KEY, number INTEGER NOT NULL UNIQUE, sha256 TEXT NOT NULL, applied_at INTEGER NOT NULL)`);
  const done = new Set((db.prepare('SELECT name FROM schema_migrations').all() as { name: string }[]).map((r) => r.name));
  const applied: string[] = [];
  for (const m of known) {
    if (done.has(m.name)) continue;
    const run = db.transaction(() => {
      db.exec(m.sql);
      db.prepare('INSERT INTO schema_migrations (name, number, sha256, applied_at) VALUES (?, ?, ?, ?)').run(m.name, m.number, m.sha256, Date.now());
    });
    try {
      run();
    } catch (e) {
      throw new StorageOpenError(`migration ${m.name} failed on database ${file}: ${(e as Error).message}`);
    }
    applied.push(m.name);
  }
  if ((db.pragma('user_version', { simple: true }) as number) !== known.length) db.pragma(`user_version = ${known.length}`);
  return applied;
}
