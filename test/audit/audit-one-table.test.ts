/**
 * One audit table (migration 204): a database written by the previous version holds records in the
 * hash-chained audit_trail and rows in the old unchained `audit` table (the ingest pipeline's
 * fallback). Opened by this version, the old rows are appended to the chain in the order they were
 * written, with their own fields and times; the chain verifies from the first record to the head;
 * the old table is gone; the REST audit view lists the carried records beside the others.
 */
import Database from 'better-sqlite3';
import { copyFileSync, mkdirSync, mkdtempSync, readdirSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { ChainedAuditTrail } from '../../server/audit/audit-trail.ts';
import { migrate, MIGRATIONS_DIR } from '../../server/storage/migrate.ts';
import type { UnitOfWork } from '../../server/storage/repositories.ts';
import { SqliteAuditRepository } from '../../server/storage/sqlite-audit.ts';
import { SqliteStorage } from '../../server/storage/sqlite-storage.ts';
import { login, sqliteDb, startTestServer, type TestServer } from '../server/helpers.ts';

const dir = mkdtempSync(join(tmpdir(), 'tideline-audit-one-table-'));
let ts: TestServer | undefined;
afterAll(async () => {
  await ts?.stop();
  rmSync(dir, { recursive: true, force: true });
});

/** A database as the previous version left it: every migration before 204, chained records and old-table rows. */
async function previousVersionDatabase(file: string, legacy: { at: number; user: string; action: string; object: string; before: string | null; after: string | null; reason: string | null }[]): Promise<void> {
  const before = join(dir, 'migrations-before');
  mkdirSync(before, { recursive: true });
  for (const f of readdirSync(MIGRATIONS_DIR).filter((f) => /^\d{3}[-_].*\.sql$/.test(f) && Number(f.slice(0, 3)) < 204)) copyFileSync(join(MIGRATIONS_DIR, f), join(before, f));
  const db = new Database(file);
  db.pragma('foreign_keys = ON');
  migrate(db, before, file);
  // chained records written the way the audit trail writes them (a transaction around each append)
  const repo = new SqliteAuditRepository(db);
  const trail = new ChainedAuditTrail(
    {
      audit: repo,
      unitOfWork: async <T>(work: (u: UnitOfWork) => Promise<T>) => {
        db.exec('BEGIN IMMEDIATE');
        try {
          const out = await work({ audit: repo } as Partial<UnitOfWork> as UnitOfWork); // the trail appends through audit only
          db.exec('COMMIT');
          return out;
        } catch (e) {
          db.exec('ROLLBACK');
          throw e;
        }
      },
    },
    { now: () => Date.UTC(2026, 2, 1, 9, 0, 0) },
  );
  await trail.record({ user: 'ada', action: 'unit.create', object: 'unit:dryer-1', after: { id: 'dryer-1' } });
  await trail.record({ user: 'ada', action: 'model.build', object: 'model:m@1', reason: 'first build' });
  const ins = db.prepare('INSERT INTO audit (at, user, action, object, before, after, reason) VALUES (?, ?, ?, ?, ?, ?, ?)');
  for (const r of legacy) ins.run(r.at, r.user, r.action, r.object, r.before, r.after, r.reason);
  db.close();
}

describe('one audit table', () => {
  it('old-table rows are appended to the chain with their own fields; the chain verifies; the table is gone', async () => {
    const data = join(dir, 'a');
    mkdirSync(data);
    const file = join(data, 'tideline.db');
    const legacy = [
      { at: Date.UTC(2026, 1, 3, 7, 15, 2, 7), user: 'system', action: 'alarm.suppress', object: 'alarm:dryer-1/t2', before: '{"state":"active-unacknowledged"}', after: '{"suppressedBy":["function-check"]}', reason: 'analyzer function check' },
      { at: Date.UTC(2026, 1, 3, 7, 19, 0, 999), user: 'system', action: 'alarm.unsuppress', object: 'alarm:dryer-1/t2', before: null, after: '{"suppressedBy":[]}', reason: null },
      { at: Date.UTC(2026, 1, 4, 0, 0, 0, 0), user: 'olga "the operator" ✓', action: 'alarm.shelve', object: 'alarm:dryer-1/q', before: null, after: null, reason: 'line1\nline2' },
    ];
    await previousVersionDatabase(file, legacy);

    const st = new SqliteStorage({ file, checkpointInWorker: false });
    try {
      const trail = new ChainedAuditTrail(st);
      expect(await trail.verify()).toMatchObject({ ok: true, count: 5 });
      const recs = await st.audit.list({});
      expect(recs.map((r) => [r.seq, r.action])).toEqual([[1, 'unit.create'], [2, 'model.build'], [3, 'alarm.suppress'], [4, 'alarm.unsuppress'], [5, 'alarm.shelve']]);
      legacy.forEach((l, i) => {
        expect(recs[2 + i]).toMatchObject({ at: new Date(l.at).toISOString(), user: l.user, action: l.action, object: l.object, before: l.before, after: l.after, reason: l.reason, prevHash: recs[1 + i]!.hash });
      });
      expect(await st.audit.head()).toEqual({ seq: 5, hash: recs[4]!.hash });
      expect(st.db.prepare(`SELECT name FROM sqlite_master WHERE type = 'table' AND name = 'audit'`).get()).toBeUndefined();
      // the next record chains on after the carried ones
      await trail.record({ user: 'ada', action: 'unit.create', object: 'unit:dryer-2' });
      expect(await trail.verify()).toMatchObject({ ok: true, count: 6 });
    } finally {
      await st.close();
    }
    // The chain as an outside reader recomputes it: SHA-256 over JSON of the fields (docs/security.md), by python3.
    const { execFileSync } = await import('node:child_process');
    const db = new Database(file, { readonly: true });
    const rows = db.prepare('SELECT seq, at, user, action, object, before, after, reason, prev_hash, hash FROM audit_trail ORDER BY seq').all();
    db.close();
    const py = `
import hashlib, json, sys
rows = json.load(sys.stdin)
prev = '0' * 64
bad = 0
for r in rows:
    s = json.dumps([r['seq'], r['at'], r['user'], r['action'], r['object'], r['before'], r['after'], r['reason'], prev], separators=(',', ':'), ensure_ascii=False)
    h = hashlib.sha256(s.encode('utf-8')).hexdigest()
    if r['prev_hash'] != prev or r['hash'] != h: bad += 1
    prev = r['hash']
print(bad, len(rows))
`;
    expect(execFileSync('python3', ['-c', py], { input: JSON.stringify(rows) }).toString().trim()).toBe('0 6');
  });

  it('a database with an empty old table: nothing is added, the table goes, the server starts and lists the trail', async () => {
    const data = join(dir, 'b');
    mkdirSync(data);
    await previousVersionDatabase(join(data, 'tideline.db'), []);
    ts = await startTestServer({}, { dir: data });
    expect(sqliteDb(ts.server.ctx.storage).prepare(`SELECT name FROM sqlite_master WHERE type = 'table' AND name = 'audit'`).get()).toBeUndefined();
    const admin = await login(ts);
    const v = await admin.get('/api/audit/verify');
    expect(v.status).toBe(200);
    expect(v.body).toMatchObject({ ok: true });
    const list = await admin.get('/api/audit?action=model.');
    expect(list.body.items.map((r: { seq: number }) => r.seq)).toEqual([2]);
  });
});
