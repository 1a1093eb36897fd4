/**
 * Start-up on a database or a configuration Tideline cannot run on: the command ends with one
 * sentence naming the file and what differs (exit code 2, no stack trace), and the file is left as
 * it was. Through the CLI as a site runs it (`migrate` opens the database exactly as `serve` does).
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, statSync, truncateSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import Database from 'better-sqlite3';
import { describe, expect, it } from 'vitest';
import { migrationChecksum, readMigrations, schemaVersion } from '../../server/storage/migrate.ts';
import { StorageOpenError } from '../../server/storage/open-check.ts';
import { SqliteStorage } from '../../server/storage/sqlite-storage.ts';

const ROOT = resolve(import.meta.dirname, '../..');
const cli = (args: string[]) =>
  spawnSync(process.execPath, ['--import', 'tsx', 'server/cli.ts', ...args], { cwd: ROOT, encoding: 'utf8', env: { ...process.env, TIDELINE_LOG_LEVEL: 'warn' } });

/** A data folder with a migrated database holding one unit, its WAL folded into the file. */
async function dataDir(): Promise<{ dir: string; file: string }> {
  const dir = mkdtempSync(join(tmpdir(), 'tideline-start-'));
  const file = join(dir, 'tideline.db');
  const s = new SqliteStorage({ file, checkpointInWorker: false });
  await s.createUnit({ id: 'dryer-1', name: 'Dryer 1', kind: 'dryer', description: '', createdAt: 1 });
  s.db.pragma('wal_checkpoint(TRUNCATE)');
  await s.close();
  return { dir, file };
}

function edit(file: string, sql: string): void {
  const db = new Database(file);
  db.exec(sql);
  db.pragma('wal_checkpoint(TRUNCATE)');
  db.close();
}

/** Refused by `migrate` with a sentence matching `re`, exit 2, no stack trace, file unchanged. */
function expectRefused(dir: string, file: string, re: RegExp): void {
  const before = readFileSync(file);
  const r = cli(['migrate', '--data-dir', dir]);
  expect(r.status, r.stderr + r.stdout).toBe(2);
  expect(r.stderr).toMatch(re);
  expect(r.stderr).toContain(file);
  expect(r.stderr).not.toMatch(/\n\s+at .*:\d+:\d+/); // no stack trace
  expect(readFileSync(file).equals(before)).toBe(true);
}

describe('a database from a newer Tideline is refused before anything is written to it', () => {
  it('refuses a higher schema version, naming both versions', async () => {
    const { dir, file } = await dataDir();
    edit(file, `PRAGMA user_version = ${schemaVersion() + 5}`);
    expectRefused(dir, file, new RegExp(`schema version ${schemaVersion() + 5}, but this Tideline .* knows schema versions up to ${schemaVersion()}: it was written by a newer Tideline`));
  }, 60_000);

  it('refuses a migration this version does not know, naming it', async () => {
    const { dir, file } = await dataDir();
    edit(file, `INSERT INTO schema_migrations (name, number, sha256, applied_at) VALUES ('399-future.sql', 399, '${'a'.repeat(64)}', 1)`);
    expectRefused(dir, file, /migration 399-future\.sql applied, which this Tideline .* does not know/);
  }, 60_000);

  it('refuses a migration applied from a file with another checksum', async () => {
    const { dir, file } = await dataDir();
    edit(file, `UPDATE schema_migrations SET sha256 = '${'0'.repeat(64)}' WHERE name = '001_initial.sql'`);
    expectRefused(dir, file, /migration 001_initial\.sql applied from a different file \(checksum 000000000000…/);
  });

  it('records the checksums of a database that has none and keeps its data', async () => {
    const { file } = await dataDir();
    edit(file, `UPDATE schema_migrations SET sha256 = ''; PRAGMA user_version = 0`);
    const s = new SqliteStorage({ file, checkpointInWorker: false });
    const rows = s.db.prepare('SELECT name, sha256 FROM schema_migrations ORDER BY number').all() as { name: string; sha256: string }[];
    const known = new Map(readMigrations().map((m) => [m.name, m.sha256]));
    expect(rows.length).toBe(known.size);
    for (const r of rows) expect(r.sha256).toBe(known.get(r.name));
    expect(s.db.pragma('user_version', { simple: true })).toBe(schemaVersion());
    expect((await s.getUnit('dryer-1'))?.name).toBe('Dryer 1');
    await s.close();
  });

  it('takes a migration checked out with CRLF line ends as the same file', () => {
    const sql = readMigrations()[0]!.sql;
    expect(migrationChecksum(sql.replace(/\n/g, '\r\n'))).toBe(migrationChecksum(sql));
  });
});

describe('a damaged, empty or foreign database file is refused naming the file', () => {
  it('refuses a 0-byte file where the database was expected instead of starting afresh', () => {
    const dir = mkdtempSync(join(tmpdir(), 'tideline-start-'));
    const file = join(dir, 'tideline.db');
    writeFileSync(file, '');
    expectRefused(dir, file, /is an empty file \(0 bytes\) where a Tideline database was expected; Tideline will not start it as a new, empty installation/);
    expect(statSync(file).size).toBe(0);
  }, 60_000);

  it('starts a new installation when the file does not exist', () => {
    const dir = mkdtempSync(join(tmpdir(), 'tideline-start-'));
    const r = cli(['migrate', '--data-dir', dir]);
    expect(r.status, r.stderr).toBe(0);
    expect(statSync(join(dir, 'tideline.db')).size).toBeGreaterThan(0);
  }, 60_000);

  it('refuses a truncated file', async () => {
    const { dir, file } = await dataDir();
    const size = statSync(file).size;
    truncateSync(file, size - 4096); // whole pages missing from the end
    expectRefused(dir, file, /is truncated: it holds \d+ bytes but its header says \d+ pages/);
    truncateSync(file, 10_000); // not even whole pages
    expectRefused(dir, file, /is truncated or damaged: its 10000 bytes are not a whole number of \d+-byte pages/);
  }, 60_000);

  it('refuses a foreign file and an SQLite database of another program', () => {
    const dir = mkdtempSync(join(tmpdir(), 'tideline-start-'));
    const file = join(dir, 'tideline.db');
    writeFileSync(file, 'batch,t,1100\nB1,0,0.5\n'.repeat(400));
    expectRefused(dir, file, /is not an SQLite database \(it does not begin with the SQLite header\)/);
    const other = mkdtempSync(join(tmpdir(), 'tideline-start-'));
    const ofile = join(other, 'tideline.db');
    edit(ofile, 'CREATE TABLE recipes (id INTEGER PRIMARY KEY, name TEXT); INSERT INTO recipes (name) VALUES (\'x\')');
    expectRefused(other, ofile, /is an SQLite database but not a Tideline database \(it has no schema_migrations table; its tables: recipes\)/);
  }, 60_000);

  it('refuses a database whose audit trail table was dropped', async () => {
    const { dir, file } = await dataDir();
    edit(file, 'DROP TABLE audit_trail');
    expectRefused(dir, file, /has no table audit_trail, which migration 200-audit-trail\.sql created: it was dropped outside Tideline \(the audit trail cannot go on without it\)/);
    expect(() => new SqliteStorage({ file, checkpointInWorker: false })).toThrow(StorageOpenError);
  }, 60_000);
});

describe('configuration mistakes found at start end in a sentence naming the file and setting', () => {
  it('a signal channel setting in the config file', () => {
    const dir = mkdtempSync(join(tmpdir(), 'tideline-start-'));
    const cfg = join(dir, 'tideline.json');
    writeFileSync(cfg, JSON.stringify({ signals: { webhooks: [{ name: 'mes', url: 'ftp://mes.local/in', secret: 'short' }] } }));
    const r = cli(['serve', '--config', cfg, '--data-dir', dir, '--port', '0', '--web-dir', 'none']);
    expect(r.status).toBe(2);
    expect(r.stderr).toContain(`configuration (file ${cfg}): signals.webhooks.0.url: must be an http:// or https:// URL`);
    expect(r.stderr).toMatch(/signals\.webhooks\.0\.secret/);
    expect(r.stderr).not.toMatch(/\n\s+at .*:\d+:\d+/);
  }, 60_000);

  it('a TLS certificate file that cannot be read or is not PEM', () => {
    const dir = mkdtempSync(join(tmpdir(), 'tideline-start-'));
    const key = join(dir, 'key.pem');
    writeFileSync(key, 'not a key');
    const missing = join(dir, 'nowhere', 'cert.pem');
    const cfg = join(dir, 'tideline.json');
    writeFileSync(cfg, JSON.stringify({ tls: { cert: missing, key } }));
    const r = cli(['serve', '--config', cfg, '--data-dir', dir, '--port', '0', '--web-dir', 'none']);
    expect(r.status).toBe(2);
    expect(r.stderr).toContain(`tls.cert: cannot read the file ${missing}`);
    expect(r.stderr).not.toMatch(/\n\s+at .*:\d+:\d+/);
    writeFileSync(missing.replace('nowhere/', ''), 'not a certificate');
    writeFileSync(cfg, JSON.stringify({ tls: { cert: missing.replace('nowhere/', ''), key } }));
    const r2 = cli(['serve', '--config', cfg, '--data-dir', dir, '--port', '0', '--web-dir', 'none']);
    expect(r2.status).toBe(2);
    expect(r2.stderr).toContain(`tls.cert: the file ${join(dir, 'cert.pem')} is not a PEM file`);
    expect(r2.stderr).not.toMatch(/\n\s+at .*:\d+:\d+/);
  }, 60_000);
});
