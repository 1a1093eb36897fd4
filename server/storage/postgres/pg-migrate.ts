/**
 * Applies the numbered SQL migrations of the PostgreSQL backend (server/storage/postgres/migrations,
 * NNN-name.sql, the same number ranges as the SQLite migrations: 001–099 server core, 200–299 auth
 * and audit) and records each in `schema_migrations` with the SHA-256 of its file.
 *
 * Everything runs in one transaction under a transaction-level advisory lock, so that instances
 * starting together on one database migrate it once, and a failed migration leaves the schema as it
 * was (PostgreSQL's DDL is transactional). Before applying anything the database is checked as the
 * SQLite one is (a refusal is a StorageOpenError naming the database and what differs):
 * - a schema that has tables but no schema_migrations is not a Tideline database: left untouched;
 * - every recorded migration must be one this version knows, applied from the same file (checksum);
 * - every table the applied migrations created must still be there.
 */
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import type postgres from 'postgres';
import { readMigrations, tablesCreatedBy, type MigrationFile } from '../migrate.ts';
import { StorageOpenError } from '../open-check.ts';

export const PG_MIGRATIONS_DIR = join(dirname(fileURLToPath(import.meta.url)), 'migrations');

/** The advisory lock key of migrations (an arbitrary constant: 'TDLM' in ASCII). */
const MIGRATION_LOCK = 0x54444c4d;

/** A connection URL without its password, for messages. */
export function redactUrl(url: string): string {
  return url.replace(/^(postgres(?:ql)?:\/\/[^:/@]+):[^@]*@/, '$1:***@');
}

/** Applies pending migrations after checking the database; returns the names applied now. */
export async function migratePg(sql: postgres.Sql, where: string, dir = PG_MIGRATIONS_DIR): Promise<string[]> {
  const known: MigrationFile[] = readMigrations(dir);
  return sql.begin(async (tx) => {
    await tx`SELECT pg_advisory_xact_lock(${MIGRATION_LOCK})`;
    const tables = (await tx<{ name: string }[]>`
      SELECT table_name AS name FROM information_schema.tables
      WHERE table_schema = current_schema() AND table_type IN ('BASE TABLE', 'PARTITIONED TABLE')`).map((r) => r.name);
    if (!tables.includes('schema_migrations') && tables.length > 0) {
      const some = tables.slice(0, 5).join(', ') + (tables.length > 5 ? ', …' : '');
      throw new StorageOpenError(`PostgreSQL database ${where} is not a Tideline database (schema ${'"' + (await tx`SELECT current_schema() AS s`)[0]!.s + '"'} has tables but no schema_migrations: ${some}); Tideline did not change it`);
    }
    await tx`CREATE TABLE IF NOT EXISTS schema_migrations (
      name TEXT PRIMARY KEY, number INTEGER NOT NULL UNIQUE, sha256 TEXT NOT NULL, applied_at BIGINT NOT NULL)`;
    const rows = await tx<{ name: string; sha256: string }[]>`SELECT name, sha256 FROM schema_migrations ORDER BY number`;
    const byName = new Map(known.map((m) => [m.name, m]));
    for (const r of rows) {
      const m = byName.get(r.name);
      if (!m) {
        throw new StorageOpenError(
          `PostgreSQL database ${where} has migration ${r.name} applied, which this Tideline does not know: it was written by a newer Tideline; start that version, or restore a backup made with this one`,
        );
      }
      if (r.sha256 !== m.sha256) {
        throw new StorageOpenError(
          `PostgreSQL database ${where} has migration ${r.name} applied from a different file (checksum ${r.sha256.slice(0, 12)}…, this Tideline's file ${m.sha256.slice(0, 12)}…): it was written by another build of Tideline; start that build, or restore a backup made with this one`,
        );
      }
    }
    const done = new Set(rows.map((r) => r.name));
    const present = new Set(tables);
    for (const [table, by] of tablesCreatedBy(known.filter((m) => done.has(m.name)))) {
      if (!present.has(table)) {
        throw new StorageOpenError(
          `PostgreSQL database ${where} has no table ${table}, which migration ${by} created: it was dropped outside Tideline${table.startsWith('audit') ? ' (the audit trail cannot go on without it)' : ''}; restore the database from a backup`,
        );
      }
    }
    const applied: string[] = [];
    for (const m of known) {
      if (done.has(m.name)) continue;
      try {
        await tx.unsafe(m.sql);
      } catch (e) {
        throw new StorageOpenError(`migration ${m.name} failed on PostgreSQL database ${where}: ${(e as Error).message}`);
      }
      await tx`INSERT INTO schema_migrations (name, number, sha256, applied_at) VALUES (${m.name}, ${m.number}, ${m.sha256}, ${Date.now()})`;
      applied.push(m.name);
    }
    return applied;
  });
}
