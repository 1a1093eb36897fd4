import { describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { openTestDb } from './db-fixture.ts';
import { ChainedAuditTrail } from '../../server/audit/audit-trail.ts';
import { canonicalJson } from '../../server/audit/canonical-json.ts';
import { GENESIS_HASH, recordHash } from '../../server/audit/record-hash.ts';

function fixedClock(start = Date.UTC(2026, 0, 5, 8, 0, 0)): () => number {
  let t = start;
  return () => (t += 1000);
}

async function seeded(n = 5) {
  const { db, storage } = openTestDb();
  const trail = new ChainedAuditTrail(storage, { now: fixedClock() });
  for (let i = 1; i <= n; i++) {
    await trail.record({ user: i % 2 ? 'alice' : { name: 'bob' }, action: 'model.build', object: `model:m@${i}`, after: { v: i }, reason: `r${i}` });
  }
  return { db, storage, trail };
}

function dropTriggers(db: ReturnType<typeof openTestDb>['db']) {
  db.exec('DROP TRIGGER audit_trail_no_update; DROP TRIGGER audit_trail_no_delete; DROP TRIGGER audit_head_no_delete;');
}

describe('audit trail', () => {
  it('appends records with seq 1…n, UTC ISO times and a hash chain from the genesis hash', async () => {
    const { trail } = await seeded(3);
    const rows = await trail.list();
    expect(rows.map((r) => r.seq)).toEqual([1, 2, 3]);
    expect(rows[0].prevHash).toBe(GENESIS_HASH);
    expect(rows[1].prevHash).toBe(rows[0].hash);
    expect(rows[2].prevHash).toBe(rows[1].hash);
    expect(rows[0].at).toBe('2026-01-05T08:00:01.000Z');
    expect(rows[1].user).toBe('bob');
    expect(rows[0].before).toBeNull();
    expect(rows[0].after).toBe('{"v":1}');
    expect((await trail.verify())).toEqual({ ok: true, count: 3, headSeq: 3, headHash: rows[2].hash });
  });

  it('an empty trail (no record, no user) is not reported intact: it says there is nothing to verify', async () => {
    const { storage } = openTestDb();
    const v = await new ChainedAuditTrail(storage, { countUsers: async () => 0 }).verify();
    expect(v).toMatchObject({ ok: true, count: 0, headSeq: 0, headHash: GENESIS_HASH, empty: true });
    expect(v.ok && v.note).toMatch(/^nothing to verify: the audit trail holds 0 records.*no evidence of an intact trail/);
    // one record later it is a verified trail again, with no such note
    const trail = new ChainedAuditTrail(storage, { now: fixedClock() });
    await trail.record({ user: 'alice', action: 'model.build', object: 'model:m@1' });
    const w = await trail.verify();
    expect(w).toMatchObject({ ok: true, count: 1, headSeq: 1 });
    expect(w).not.toHaveProperty('empty');
    expect(w).not.toHaveProperty('note');
  });

  it('the chain recomputes in Python (hashlib SHA-256, FIPS 180-4) from the JSON export', async () => {
    const { storage } = openTestDb();
    const trail = new ChainedAuditTrail(storage, { now: fixedClock() });
    await trail.record({ user: 'zoë', action: 'alarm.acknowledge', object: 'alarm:7', before: { state: 'active-unacknowledged', b: [1, 2.5] }, after: { state: 'active-acknowledged' }, reason: 'seen — probe window "fouled",\nwiping ✓ \u0001' });
    await trail.record({ user: 'system', action: 'signal.sent', object: 'unit:dryer-1' });
    const exported = await trail.exportJson();
    const py = `
import json, hashlib, sys
doc = json.load(sys.stdin)
prev = "0" * 64
out = []
for r in doc["records"]:
    s = json.dumps([r["seq"], r["at"], r["user"], r["action"], r["object"], r["before"], r["after"], r["reason"], prev], separators=(",", ":"), ensure_ascii=False)
    h = hashlib.sha256(s.encode("utf-8")).hexdigest()
    out.append(h)
    prev = h
print(json.dumps(out))
`;
    const hashes = JSON.parse(execFileSync('python3', ['-c', py], { input: exported, encoding: 'utf8' })) as string[];
    expect(hashes).toEqual((await trail.list()).map((r) => r.hash));
  });

  it('refuses UPDATE and DELETE at the database (triggers)', async () => {
    const { db } = await seeded(2);
    expect(() => db.prepare("UPDATE audit_trail SET user = 'mallory' WHERE seq = 1").run()).toThrow(/append-only/);
    expect(() => db.prepare('DELETE FROM audit_trail WHERE seq = 2').run()).toThrow(/append-only/);
  });

  it('an edited row (triggers dropped) makes verify fail at that row', async () => {
    const { db, trail } = await seeded(5);
    dropTriggers(db);
    db.prepare("UPDATE audit_trail SET reason = 'nothing to see' WHERE seq = 3").run();
    const v = await trail.verify();
    expect(v.ok).toBe(false);
    if (!v.ok) {
      expect(v.brokenSeq).toBe(3);
      expect(v.problem).toMatch(/edited/);
      expect(v.count).toBe(2);
    }
  });

  it('an edited row whose own hash was recomputed breaks the link of the next row', async () => {
    const { db, trail } = await seeded(5);
    dropTriggers(db);
    const r = (await trail.list()).find((x) => x.seq === 2)!;
    const forged = { ...r, user: 'mallory' };
    db.prepare('UPDATE audit_trail SET user = ?, hash = ? WHERE seq = 2').run('mallory', recordHash(forged));
    const v = await trail.verify();
    expect(v.ok).toBe(false);
    if (!v.ok) {
      expect(v.brokenSeq).toBe(3);
      expect(v.problem).toMatch(/prev_hash/);
    }
  });

  it('a deleted row makes verify fail naming the missing record', async () => {
    const { db, trail } = await seeded(5);
    dropTriggers(db);
    db.prepare('DELETE FROM audit_trail WHERE seq = 4').run();
    const v = await trail.verify();
    expect(v).toMatchObject({ ok: false, brokenSeq: 4, count: 3 });
    if (!v.ok) expect(v.problem).toMatch(/missing.*deleted/);
  });

  it('rows deleted from the end are caught by the chain head', async () => {
    const { db, trail } = await seeded(5);
    dropTriggers(db);
    db.prepare('DELETE FROM audit_trail WHERE seq >= 4').run();
    const v = await trail.verify();
    expect(v).toMatchObject({ ok: false, brokenSeq: 4 });
    if (!v.ok) expect(v.problem).toMatch(/missing from the end/);
  });

  it('a record written inside a rolled-back unit of work leaves no trace', async () => {
    const { storage, trail } = await seeded(2);
    await expect(
      storage.unitOfWork(async (uow) => {
        await trail.record({ user: 'alice', action: 'model.approve', object: 'model:m@1' }, uow);
        throw new Error('state change failed');
      }),
    ).rejects.toThrow('state change failed');
    expect(await trail.list()).toHaveLength(2);
    expect((await trail.verify()).ok).toBe(true);
    await trail.record({ user: 'alice', action: 'model.approve', object: 'model:m@1' });
    expect(await trail.verify()).toMatchObject({ ok: true, count: 3 });
  });

  it('refuses malformed entries with a message naming the field', async () => {
    const { trail } = await seeded(0);
    await expect(trail.record({ user: 'a', action: 'Model Approve', object: 'x' })).rejects.toThrow(/action/);
    await expect(trail.record({ user: 'a', action: 'x.y', object: '' })).rejects.toThrow(/object/);
    await expect(trail.record({ user: 'a', action: 'x.y', object: 'o', reason: 'x'.repeat(4001) })).rejects.toThrow(/reason/);
    expect(await trail.list()).toHaveLength(0);
  });

  it('filters by user, action prefix, object prefix, time and seq', async () => {
    const { trail } = await seeded(6);
    const seqs = async (f: Parameters<typeof trail.list>[0]) => (await trail.list(f)).map((r) => r.seq);
    expect(await seqs({ user: 'bob' })).toEqual([2, 4, 6]);
    expect(await trail.list({ action: 'model.' })).toHaveLength(6);
    expect(await trail.list({ action: 'model' })).toHaveLength(0);
    expect(await seqs({ object: 'model:m@3' })).toEqual([3]);
    expect(await seqs({ from: '2026-01-05T08:00:03Z', to: '2026-01-05T08:00:05Z' })).toEqual([3, 4]);
    expect(await seqs({ afterSeq: 4 })).toEqual([5, 6]);
    expect(await seqs({ descending: true, limit: 2 })).toEqual([6, 5]);
    await expect(trail.list({ from: 'yesterday' })).rejects.toThrow(/from: not a time/);
    await expect(trail.list({ limit: 0 })).rejects.toThrow(/limit/);
  });

  it('CSV export follows RFC 4180 quoting and round-trips through Python csv to the same hashes', async () => {
    const { storage } = openTestDb();
    const trail = new ChainedAuditTrail(storage, { now: fixedClock() });
    await trail.record({ user: 'a', action: 'alarm.shelve', object: 'alarm:1', after: { note: 'x,"y"' }, reason: 'line1\r\nline2, "q"' });
    await trail.record({ user: 'b', action: 'alarm.unshelve', object: 'alarm:1' });
    const csv = await trail.exportCsv();
    expect(csv.split('\r\n')[0]).toBe('seq,at,user,action,object,before,after,reason,prev_hash,hash');
    const py = `
import csv, hashlib, io, json, sys
rows = list(csv.DictReader(io.StringIO(sys.stdin.read(), newline="")))
prev = "0" * 64
ok = []
for r in rows:
    n = lambda v: None if v == "" else v
    s = json.dumps([int(r["seq"]), r["at"], r["user"], r["action"], r["object"], n(r["before"]), n(r["after"]), n(r["reason"]), prev], separators=(",", ":"), ensure_ascii=False)
    h = hashlib.sha256(s.encode("utf-8")).hexdigest()
    ok.append(h == r["hash"] and r["prev_hash"] == prev)
    prev = h
print(json.dumps(ok))
`;
    expect(JSON.parse(execFileSync('python3', ['-c', py], { input: csv, encoding: 'utf8' }))).toEqual([true, true]);
  });
});

describe('canonical JSON', () => {
  it('sorts keys at every depth and drops whitespace', async () => {
    expect(canonicalJson({ b: 1, a: { d: [3, { z: 1, y: 2 }], c: null } })).toBe('{"a":{"c":null,"d":[3,{"y":2,"z":1}]},"b":1}');
    expect(canonicalJson({ x: 1, y: 2 })).toBe(canonicalJson({ y: 2, x: 1 }));
    expect(canonicalJson({ a: undefined, b: NaN })).toBe('{"b":null}');
  });
});

describe('two writers on one database file', () => {
  it('two processes appending at once keep one unbroken chain', async () => {
    const { spawn } = await import('node:child_process');
    const { storage, file } = openTestDb();
    const helper = new URL('./helpers/write-records.ts', import.meta.url).pathname;
    const tsx = new URL('../../node_modules/.bin/tsx', import.meta.url).pathname;
    const writers = ['a', 'b'].map((who) => {
      const p = spawn(tsx, [helper, file, who, '300'], { stdio: ['pipe', 'pipe', 'pipe'] });
      let err = '';
      p.stderr.on('data', (c) => (err += c));
      const ready = new Promise<void>((resolve, reject) => {
        p.stdout.on('data', (c) => String(c).includes('ready') && resolve());
        p.on('exit', (code) => reject(new Error(`writer ${who} exited ${code} before ready: ${err}`)));
      });
      const done = new Promise<void>((resolve, reject) =>
        p.on('exit', (code) => (code === 0 ? resolve() : reject(new Error(`writer ${who} exited ${code}: ${err}`)))),
      );
      return { p, ready, done };
    });
    await Promise.all(writers.map((w) => w.ready));
    for (const w of writers) w.p.stdin.write('go\n');
    await Promise.all(writers.map((w) => w.done));
    const trail = new ChainedAuditTrail(storage);
    expect(await trail.verify()).toMatchObject({ ok: true, count: 600 });
    expect(await trail.list({ user: 'a', limit: 1000 })).toHaveLength(300);
    expect(await trail.list({ user: 'b', limit: 1000 })).toHaveLength(300);
    const users = (await trail.list({ limit: 1000 })).map((r) => r.user);
    const switches = users.filter((u, i) => i > 0 && u !== users[i - 1]).length;
    expect(switches).toBeGreaterThan(10); // the writers really did interleave
  });
});
