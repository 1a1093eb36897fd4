/**
 * Anchoring the audit trail outside the database: the tamperings a hash chain alone cannot show —
 * records cut from the end with the head row rewritten, the whole chain rewritten and re-hashed,
 * every record and the head deleted — are caught by `audit verify --anchor` (CLI as a child
 * process) and GET /api/audit/verify?anchor=, with the anchor taken from a batch report.
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import { describe, expect, it } from 'vitest';
import { recordHash, GENESIS_HASH } from '../../server/audit/record-hash.ts';
import { SqliteStorage } from '../../server/storage/sqlite-storage.ts';
import { createSecurity } from '../../server/auth/security-setup.ts';
import { login, startTestServer } from '../server/helpers.ts';

const cli = (args: string[]) => spawnSync(process.execPath, ['--import', 'tsx', 'server/cli.ts', ...args], { encoding: 'utf8', env: { ...process.env, TIDELINE_LOG_LEVEL: 'warn' } });

/** A data folder whose trail has `n` records (a user's creation, then unit changes). */
async function seededDir(n: number): Promise<string> {
  const dir = mkdtempSync(join(tmpdir(), 'tideline-anchor-'));
  const st = new SqliteStorage({ file: join(dir, 'tideline.db') });
  const { audit, auth } = createSecurity(st, { auth: { scryptLog2N: 10 } });
  await auth.createUser({ name: 'ada', role: 'administrator', password: 'correct horse battery staple 42' }, 'test');
  for (let i = 2; i <= n; i++) await audit.record({ user: 'ada', action: 'unit.create', object: `unit:u${i}`, after: { i } });
  await st.close();
  return dir;
}

/** What someone with write access to the file does: drop the triggers and change rows. */
function tamper(dir: string, f: (db: Database.Database) => void): void {
  const db = new Database(join(dir, 'tideline.db'));
  db.exec('DROP TRIGGER audit_trail_no_update; DROP TRIGGER audit_trail_no_delete; DROP TRIGGER audit_head_no_delete;');
  f(db);
  db.close();
}

/** Recompute every hash from record 1 on, as a forger who knows the published formula would. */
function rehashAll(db: Database.Database): void {
  let prev = GENESIS_HASH;
  const rows = db.prepare('SELECT * FROM audit_trail ORDER BY seq').all() as Record<string, any>[];
  for (const r of rows) {
    const hash = recordHash({ seq: r.seq, at: r.at, user: r.user, action: r.action, object: r.object, before: r.before, after: r.after, reason: r.reason, prevHash: prev });
    db.prepare('UPDATE audit_trail SET prev_hash = ?, hash = ? WHERE seq = ?').run(prev, hash, r.seq);
    prev = hash;
  }
  const last = rows[rows.length - 1];
  if (last) db.prepare('UPDATE audit_head SET seq = ?, hash = ? WHERE id = 1').run(last.seq, prev);
}

function anchorOf(stdout: string): string {
  const m = /anchor \(keep it outside the server\): (\d+:[0-9a-f]{64})/.exec(stdout);
  if (!m) throw new Error(`no anchor in: ${stdout}`);
  return m[1]!;
}

describe('audit trail anchored outside the database', () => {
  it('records cut from the end with the head rewritten: intact without an anchor (as documented), broken with one', async () => {
    const dir = await seededDir(6);
    const data = ['--data-dir', dir];
    let r = cli(['audit', 'verify', ...data]);
    expect(r.status).toBe(0);
    const anchor = anchorOf(r.stdout);
    expect(anchor).toMatch(/^6:/);
    tamper(dir, (db) => {
      db.exec('DELETE FROM audit_trail WHERE seq > 4');
      const h = db.prepare('SELECT hash FROM audit_trail WHERE seq = 4').get() as { hash: string };
      db.prepare('UPDATE audit_head SET seq = 4, hash = ? WHERE id = 1').run(h.hash);
    });
    r = cli(['audit', 'verify', ...data]);
    expect(r.status).toBe(0);
    expect(r.stdout).toMatch(/without --anchor, a trail cut back at its end or rewritten as a whole cannot be told from an intact one/);
    r = cli(['audit', 'verify', '--anchor', anchor, ...data]);
    expect(r.status).toBe(1);
    expect(r.stdout).toMatch(/BROKEN at record 5: the anchor 6:[0-9a-f]{64} names record 6, but the trail ends at record 4: records were removed from the end/);
  }, 240_000);

  it('a whole chain rewritten and re-hashed is caught by an anchor read from a file', async () => {
    const dir = await seededDir(5);
    const before = new SqliteStorage({ file: join(dir, 'tideline.db') });
    const { audit } = createSecurity(before, {});
    const head = (await audit.anchor())!;
    await before.close();
    tamper(dir, (db) => {
      db.prepare("UPDATE audit_trail SET after = '{\"i\":99}' WHERE seq = 3").run();
      rehashAll(db);
    });
    // A saved report or webhook body holds the anchor among other text.
    const saved = join(dir, 'filed-report.txt');
    writeFileSync(saved, `Batch report D-1\nAudit trail anchor when this report was generated:\n${head.seq}:${head.hash}\n`);
    let r = cli(['audit', 'verify', '--data-dir', dir]);
    expect(r.status).toBe(0); // the forgery is self-consistent
    r = cli(['audit', 'verify', '--anchor-file', saved, '--data-dir', dir]);
    expect(r.status).toBe(1);
    expect(r.stdout).toMatch(/BROKEN at record 5: record 5 has hash [0-9a-f]{12}…, but the anchor .* says [0-9a-f]{12}…: the chain was rewritten at or before record 5/);
  }, 240_000);

  it('every record and the head deleted is broken even without an anchor, and a bad anchor is a usage error', async () => {
    const dir = await seededDir(3);
    tamper(dir, (db) => db.exec('DELETE FROM audit_trail; DELETE FROM audit_head;'));
    let r = cli(['audit', 'verify', '--data-dir', dir]);
    expect(r.status).toBe(1);
    expect(r.stdout).toMatch(/the trail is empty, but the database holds 1 user\(s\) whose creation is audited/);
    r = cli(['audit', 'verify', '--anchor', '12:abc', '--data-dir', dir]);
    expect(r.status).toBe(2);
    expect(r.stderr).toMatch(/--anchor: no anchor of the form SEQ:HASH/);
  }, 240_000);

  it('a batch report prints the anchor, and GET /api/audit/verify checks it', async () => {
    const ts = await startTestServer();
    try {
      const admin = await login(ts, 'administrator');
      const imp = await admin.post('/api/import', {
        unit: 'dryer-1', product: 'granule',
        files: [{ name: 'D-9.csv', content: 'batch,time_ms,1000,1010\nD-9,1767225600000,1,2\nD-9,1767225610000,1.5,2.5\n' }],
      });
      expect(imp.status).toBe(201);
      const html = await admin.get('/api/batches/D-9/report.html');
      expect(html.status).toBe(200);
      const m = /(\d+):([0-9a-f]{64})/.exec(String(html.body));
      expect(m).not.toBeNull();
      let v = await admin.get(`/api/audit/verify?anchor=${m![0]}`);
      expect(v.body).toMatchObject({ ok: true });
      expect(v.body.anchor).toMatch(/^\d+:[0-9a-f]{64}$/);
      v = await admin.get(`/api/audit/verify?anchor=${m![1]}:${'0'.repeat(64)}`);
      expect(v.body).toMatchObject({ ok: false, brokenSeq: Number(m![1]) });
      v = await admin.get('/api/audit/verify?anchor=nonsense');
      expect(v.status).toBe(400);
    } finally {
      await ts.stop();
    }
  }, 120_000);
});
