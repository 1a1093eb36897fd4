/**
 * One analyzer-token store (migration 203): a database written by the previous version, with
 * tokens issued with the analyzer (`tdl_…`, table analyzer_tokens) beside access-control tokens
 * (`tla_…`), is opened by this version. The analyzer keeps connecting over /ingest with its old
 * token, a token revoked before stays refused, and both kinds are listed and revocable in one place.
 */
import Database from 'better-sqlite3';
import { createHash, randomBytes } from 'node:crypto';
import { copyFileSync, mkdirSync, mkdtempSync, readdirSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { migrate, MIGRATIONS_DIR } from '../../server/storage/migrate.ts';
import { axis, login, Peer, sqliteDb, startTestServer, type TestServer } from './helpers.ts';

const dir = mkdtempSync(join(tmpdir(), 'tideline-token-migration-'));
let ts: TestServer | undefined;
afterAll(async () => {
  await ts?.stop();
  rmSync(dir, { recursive: true, force: true });
});

const sha = (t: string) => createHash('sha256').update(t, 'utf8').digest('hex');
/** A token as the previous version issued it with an analyzer (server/ingest/analyzer-tokens.ts then). */
const oldToken = () => 'tdl_' + randomBytes(32).toString('base64url');

describe('analyzer tokens carried into one store', () => {
  it('an analyzer keeps connecting with its old token; a revoked one stays refused; one list, one revocation', async () => {
    // The previous version's schema: every migration before 203.
    const before = join(dir, 'migrations-before');
    mkdirSync(before);
    for (const f of readdirSync(MIGRATIONS_DIR).filter((f) => /^\d{3}[-_].*\.sql$/.test(f) && Number(f.slice(0, 3)) < 203)) copyFileSync(join(MIGRATIONS_DIR, f), join(before, f));
    const data = join(dir, 'data');
    mkdirSync(data);
    const file = join(data, 'tideline.db');
    const live = oldToken();
    const revoked = oldToken();
    const accessToken = 'tla_' + randomBytes(32).toString('base64url');
    const t0 = Date.UTC(2026, 0, 5, 8, 0, 0, 250);
    {
      const db = new Database(file);
      db.pragma('foreign_keys = ON');
      migrate(db, before, file);
      db.prepare('INSERT INTO analyzers (id, name, created_at) VALUES (?, ?, ?)').run('nir-old', 'NIR old', t0);
      db.prepare('INSERT INTO analyzers (id, name, created_at) VALUES (?, ?, ?)').run('nir-gone', 'NIR gone', t0);
      db.prepare('INSERT INTO analyzer_tokens (analyzer, token_sha256, created_at, revoked_at) VALUES (?, ?, ?, NULL)').run('nir-old', sha(live), t0);
      db.prepare('INSERT INTO analyzer_tokens (analyzer, token_sha256, created_at, revoked_at) VALUES (?, ?, ?, ?)').run('nir-gone', sha(revoked), t0, t0 + 60_000);
      db.prepare('INSERT INTO auth_analyzer_tokens (id, analyzer, label, token_hash, created_at, created_by) VALUES (?, ?, ?, ?, ?, ?)').run('a1', 'nir-acc', 'bench probe', sha(accessToken), '2026-01-04T00:00:00.000Z', 'ada');
      db.close();
    }

    ts = await startTestServer({}, { dir: data });
    const db = sqliteDb(ts.server.ctx.storage);
    expect(db.prepare(`SELECT name FROM sqlite_master WHERE type = 'table' AND name = 'analyzer_tokens'`).get()).toBeUndefined();

    // the old token still opens /ingest for its analyzer
    const p = new Peer(ts.wsUrl, live);
    await p.open();
    expect((await p.hello('nir-old', 1, axis(16))).type).toBe('welcome');
    // the access-control token too
    const q = new Peer(ts.wsUrl, accessToken);
    await q.open();
    expect((await q.hello('nir-acc', 1, axis(16))).type).toBe('welcome');
    q.close();
    // the token revoked before the migration is refused at the upgrade
    await expect(new Peer(ts.wsUrl, revoked).open()).rejects.toThrow(/401/);

    const admin = await login(ts);
    const list = (await admin.get('/api/auth/tokens')).body.items as { id: string; analyzer: string; createdAt: string; revokedAt: string | null; label: string }[];
    const byId = new Map(list.map((t) => [t.id, t]));
    expect(byId.get('interim-1')).toMatchObject({ analyzer: 'nir-old', createdAt: new Date(t0).toISOString(), revokedAt: null, label: '(issued with the analyzer)' });
    expect(byId.get('interim-2')).toMatchObject({ analyzer: 'nir-gone', revokedAt: new Date(t0 + 60_000).toISOString() });
    expect(byId.get('a1')).toMatchObject({ analyzer: 'nir-acc', label: 'bench probe' });

    // revoking the carried token ends the analyzer's connection, as for any other token
    const del = await fetch(ts.server.url + '/api/auth/tokens/interim-1', { method: 'DELETE', headers: { cookie: admin.cookie, 'x-csrf-token': admin.csrf } });
    expect(del.status).toBeLessThan(300);
    expect((await p.waitClose()).code).toBe(4401);
    await expect(new Peer(ts.wsUrl, live).open()).rejects.toThrow(/401/);

    // a new analyzer gets a token of the one format
    const made = await admin.post('/api/analyzers', { id: 'nir-new' });
    expect(made.status).toBe(201);
    expect(made.body.token).toMatch(/^tla_/);
    const r = new Peer(ts.wsUrl, made.body.token);
    await r.open();
    expect((await r.hello('nir-new', 1, axis(16))).type).toBe('welcome');
    r.close();
  }, 60_000);
});
