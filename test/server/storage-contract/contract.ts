/**
 * The storage contract: what every storage backend must do for the parts beside ingest (audit,
 * signatures, signed model changes, units of work). Written against the interfaces in
 * server/storage/ only; sqlite.test.ts runs it on the embedded SQLite backend, pg.test.ts on
 * PostgreSQL, each with its own `open`.
 */
import { describe, expect, it } from 'vitest';
import type { AuditRecord } from '../../../core/api/audit.ts';
import { ChainedAuditTrail } from '../../../server/audit/audit-trail.ts';
import { emptyIngestWrite, type Storage } from '../../../server/storage/storage.ts';
import type { NewSignature, ShadowRunRow } from '../../../server/storage/repositories.ts';
import type { MonitorResult } from '../../../core/monitor/types.ts';

/** The parts of Storage this contract exercises (a backend may implement more). */
export type ContractStorage = Pick<
  Storage,
  | 'close' | 'unitOfWork' | 'audit' | 'signatures' | 'users' | 'sessions' | 'loginFailures' | 'analyzerTokens'
  | 'createUnit' | 'createAnalyzer'
  | 'nextModelVersion' | 'insertModelVersion' | 'getModelVersion' | 'approveModelVersion' | 'deploy' | 'activeDeployment'
>;

export interface ContractBackend {
  /** A fresh, empty storage (every migration applied). */
  open(): Promise<ContractStorage>;
}

const h = (c: string) => c.repeat(64);
const T0 = '2026-01-05T08:00:00.000Z';

/** A sealed record as server/audit would write it (the contract does not check hashes: server/audit does). */
function rec(seq: number, over: Partial<AuditRecord> = {}): AuditRecord {
  return {
    seq, at: new Date(Date.UTC(2026, 0, 5, 8, 0, seq)).toISOString(), user: seq % 2 ? 'alice' : 'bob', action: 'model.build', object: `model:m@${seq}`,
    before: null, after: `{"v":${seq}}`, reason: null, prevHash: seq === 1 ? h('0') : h(String((seq - 1) % 10)), hash: h(String(seq % 10)), ...over,
  };
}

function sig(userId: number, objectId: string, auditSeq: number, over: Partial<NewSignature> = {}): NewSignature {
  return {
    userId, userName: 'signer', fullName: 'S. Igner', role: 'model-owner', meaning: 'approved', objectType: 'model', objectId,
    objectHash: h('a'), reason: 'fit for use', override: null, signedAt: '2026-01-05T08:00:00.000Z', auditSeq, ...over,
  };
}

async function draftModel(st: ContractStorage, id: string): Promise<void> {
  await st.insertModelVersion({
    id, name: 'dryer', version: await st.nextModelVersion('dryer'), product: 'granule A', sha256: h('a'), body: '{}', settings: {}, referenceBatches: [],
    components: 2, confidence: 0.99, status: 'draft', createdAt: 0, createdBy: 'test', approvedAt: null, approvedBy: null, approvalReason: null,
    retiredAt: null, retiredBy: null, retireReason: null,
  });
}

export function storageContract(name: string, backend: ContractBackend): void {
  const withStorage = (fn: (st: ContractStorage, signer: number) => Promise<void>) => async () => {
    const st = await backend.open();
    try {
      await fn(st, (await st.unitOfWork((u) => u.users.insert({ name: 'signer', fullName: 'S. Igner', role: 'model-owner', passwordHash: 'scrypt$x', mustChange: false, createdBy: 'test', at: T0 }))).id);
    } finally {
      await st.close();
    }
  };

  describe(`storage contract (${name}): audit records`, () => {
    it('an empty trail has no last record and no head', withStorage(async (st) => {
      expect(await st.audit.last()).toBeNull();
      expect(await st.audit.head()).toBeNull();
      expect(await st.audit.count({})).toBe(0);
    }));

    it('appends only inside a unit of work', withStorage(async (st) => {
      await expect(st.audit.append(rec(1))).rejects.toThrow(/unit of work/);
      expect(await st.audit.count({})).toBe(0);
    }));

    it('an append moves the head; records read back exactly as written', withStorage(async (st) => {
      const r1 = rec(1, { before: '{"a":[1,2.5]}', reason: 'line1\nline2 — "q" ✓' });
      await st.unitOfWork(async (u) => u.audit.append(r1));
      await st.unitOfWork(async (u) => u.audit.append(rec(2)));
      expect(await st.audit.last()).toEqual({ seq: 2, hash: rec(2).hash });
      expect(await st.audit.head()).toEqual({ seq: 2, hash: rec(2).hash });
      expect((await st.audit.list({}))[0]).toEqual(r1);
    }));

    it('filters: user, action and object prefixes, time window, afterSeq, limit, order; count ignores limit', withStorage(async (st) => {
      await st.unitOfWork(async (u) => {
        for (let i = 1; i <= 6; i++) await u.audit.append(rec(i, i === 6 ? { action: 'modelx.build', object: 'models:6' } : {}));
      });
      const seqs = async (q: Parameters<Storage['audit']['list']>[0]) => (await st.audit.list(q)).map((r) => r.seq);
      expect(await seqs({ user: 'bob' })).toEqual([2, 4, 6]);
      expect(await seqs({ action: 'model.' })).toEqual([1, 2, 3, 4, 5]);
      expect(await seqs({ action: 'model' })).toEqual([]);
      expect(await seqs({ object: 'model:' })).toEqual([1, 2, 3, 4, 5]);
      expect(await seqs({ object: 'model:m@3' })).toEqual([3]);
      expect(await seqs({ from: rec(3).at, to: rec(5).at })).toEqual([3, 4]);
      expect(await seqs({ afterSeq: 4 })).toEqual([5, 6]);
      expect(await seqs({ descending: true, limit: 2 })).toEqual([6, 5]);
      expect(await st.audit.count({ user: 'alice', limit: 1 })).toBe(3);
    }));

    it('scan reads every record in seq order across pages', withStorage(async (st) => {
      await st.unitOfWork(async (u) => {
        for (let i = 1; i <= 5; i++) await u.audit.append(rec(i));
      });
      const seen: number[] = [];
      for await (const r of st.audit.scan(2)) seen.push(r.seq);
      expect(seen).toEqual([1, 2, 3, 4, 5]);
    }));
  });

  describe(`storage contract (${name}): signatures`, () => {
    it('signatures of an object oldest first; the latest newest first', withStorage(async (st, signer) => {
      await st.unitOfWork(async (u) => {
        await u.signatures.insert(sig(signer, 'v1', 1));
        await u.signatures.insert(sig(signer, 'v2', 2, { meaning: 'approved' }));
        await u.signatures.insert(sig(signer, 'v1', 3, { meaning: 'retired', override: 'evidence accepted' }));
      });
      const v1 = await st.signatures.forObject('model', 'v1');
      expect(v1.map((s) => [s.meaning, s.auditSeq, s.override])).toEqual([['approved', 1, null], ['retired', 3, 'evidence accepted']]);
      expect(v1[0]).toMatchObject({ userName: 'signer', fullName: 'S. Igner', role: 'model-owner', objectHash: h('a'), reason: 'fit for use', signedAt: '2026-01-05T08:00:00.000Z' });
      expect(typeof v1[0]!.id).toBe('number');
      expect((await st.signatures.list(2)).map((s) => s.auditSeq)).toEqual([3, 2]);
      expect(await st.signatures.forObject('model', 'v9')).toEqual([]);
    }));
  });

  describe(`storage contract (${name}): units of work`, () => {
    it('sign + approve + audit: a failure injected after all three leaves none of them written', withStorage(async (st, signer) => {
      await draftModel(st, 'v1');
      await expect(
        st.unitOfWork(async (u) => {
          await u.audit.append(rec(1, { action: 'signature.approved', object: 'model:v1' }));
          await u.signatures.insert(sig(signer, 'v1', 1));
          await u.models.approve('v1', 'signer', 10, 'fit for use');
          throw new Error('injected failure');
        }),
      ).rejects.toThrow('injected failure');
      expect(await st.audit.count({})).toBe(0);
      expect(await st.audit.head()).toBeNull();
      expect(await st.signatures.forObject('model', 'v1')).toEqual([]);
      expect((await st.getModelVersion('v1'))!.status).toBe('draft');
    }));

    it('sign + approve + audit: a refused approval (not a draft) takes the signature and the record with it', withStorage(async (st, signer) => {
      await draftModel(st, 'v1');
      await st.approveModelVersion('v1', 'first', 5, 'first approval');
      await expect(
        st.unitOfWork(async (u) => {
          await u.audit.append(rec(1, { action: 'signature.approved', object: 'model:v1' }));
          await u.signatures.insert(sig(signer, 'v1', 1));
          await u.models.approve('v1', 'signer', 10, 'second approval');
        }),
      ).rejects.toThrow(/not a draft/);
      expect(await st.audit.count({})).toBe(0);
      expect(await st.signatures.forObject('model', 'v1')).toEqual([]);
      expect(await st.getModelVersion('v1')).toMatchObject({ status: 'approved', approvedBy: 'first' });
    }));

    it('the same work commits all three together', withStorage(async (st, signer) => {
      await draftModel(st, 'v1');
      const out = await st.unitOfWork(async (u) => {
        await u.audit.append(rec(1, { action: 'signature.approved', object: 'model:v1' }));
        const s = await u.signatures.insert(sig(signer, 'v1', 1));
        await u.models.approve('v1', 'signer', 10, 'fit for use');
        return s.id;
      });
      expect(typeof out).toBe('number');
      expect(await st.audit.count({ action: 'signature.' })).toBe(1);
      expect(await st.signatures.forObject('model', 'v1')).toHaveLength(1);
      expect(await st.getModelVersion('v1')).toMatchObject({ status: 'approved', approvedBy: 'signer', approvalReason: 'fit for use' });
    }));

    it('retire in a unit of work ends the deployments; retiring twice is refused and rolls back', withStorage(async (st) => {
      await draftModel(st, 'v1');
      await st.approveModelVersion('v1', 'a', 1, 'ok');
      await st.createUnit({ id: 'dryer-1', name: 'dryer-1', kind: 'dryer', description: '', createdAt: 0 });
      await st.deploy({ id: 'd1', unit: 'dryer-1', modelVersion: 'v1', deployedAt: 2, deployedBy: 'a', reason: null, endedAt: null });
      await st.unitOfWork(async (u) => u.models.retire('v1', 'b', 3, 'superseded'));
      expect(await st.activeDeployment('dryer-1')).toBeNull();
      await expect(
        st.unitOfWork(async (u) => {
          await u.audit.append(rec(1));
          await u.models.retire('v1', 'b', 4, 'again');
        }),
      ).rejects.toThrow(/already retired/);
      expect(await st.audit.count({})).toBe(0);
    }));

    it('deploy in a unit of work ends the unit\'s deployment before it; a failure keeps the old one', withStorage(async (st) => {
      await draftModel(st, 'v1');
      await draftModel(st, 'v2');
      await st.createUnit({ id: 'dryer-1', name: 'dryer-1', kind: 'dryer', description: '', createdAt: 0 });
      await st.deploy({ id: 'd1', unit: 'dryer-1', modelVersion: 'v1', deployedAt: 1, deployedBy: 'a', reason: null, endedAt: null });
      const d2 = { id: 'd2', unit: 'dryer-1', modelVersion: 'v2', deployedAt: 2, deployedBy: 'b', reason: 'better', endedAt: null };
      await expect(
        st.unitOfWork(async (u) => {
          await u.audit.append(rec(1, { action: 'model.deploy', object: 'unit:dryer-1' }));
          await u.models.deploy(d2);
          throw new Error('injected failure');
        }),
      ).rejects.toThrow('injected failure');
      expect((await st.activeDeployment('dryer-1'))?.id).toBe('d1');
      await st.unitOfWork(async (u) => u.models.deploy(d2));
      expect(await st.activeDeployment('dryer-1')).toMatchObject({ id: 'd2', modelVersion: 'v2', deployedBy: 'b', reason: 'better', endedAt: null });
    }));

    it('units of work started together run one after another (the chain stays whole)', withStorage(async (st) => {
      const trail = new ChainedAuditTrail(st, { now: () => Date.UTC(2026, 0, 5) });
      await Promise.all(Array.from({ length: 20 }, (_, i) => trail.record({ user: `u${i % 3}`, action: 'test.write', object: `obj:${i}` })));
      expect(await trail.verify()).toMatchObject({ ok: true, count: 20 });
    }));

    it('a failed unit does not stop the next one', withStorage(async (st) => {
      await expect(st.unitOfWork(async () => Promise.reject(new Error('first fails')))).rejects.toThrow('first fails');
      await st.unitOfWork(async (u) => u.audit.append(rec(1)));
      expect(await st.audit.count({})).toBe(1);
    }));
  });
}

export function authContract(name: string, backend: ContractBackend): void {
  const withStorage = (fn: (st: ContractStorage) => Promise<void>) => async () => {
    const st = await backend.open();
    try {
      await fn(st);
    } finally {
      await st.close();
    }
  };

  describe(`storage contract (${name}): access control`, () => {
    it('users: names unique regardless of case; changes read back; administrators counted', withStorage(async (st) => {
      const ada = await st.users.insert({ name: 'Ada', fullName: 'Ada L.', role: 'administrator', passwordHash: 'scrypt$a', mustChange: true, createdBy: 'cli:root', at: T0 });
      expect(ada).toMatchObject({ name: 'Ada', full_name: 'Ada L.', role: 'administrator', must_change_password: 1, created_by: 'cli:root', password_changed_at: T0, disabled_at: null });
      expect((await st.users.byName('ada'))?.id).toBe(ada.id);
      await expect(st.users.insert({ name: 'ADA', fullName: 'x', role: 'viewer', passwordHash: 'h', mustChange: false, createdBy: 't', at: T0 })).rejects.toThrow();
      await st.users.insert({ name: 'bob', fullName: 'Bob', role: 'administrator', passwordHash: 'scrypt$b', mustChange: false, createdBy: 't', at: T0 });
      expect(await st.users.activeAdministrators()).toBe(2);
      await st.users.setDisabled(ada.id, '2026-01-06T00:00:00.000Z');
      await st.users.setRole(ada.id, 'operator');
      await st.users.setFullName(ada.id, 'Ada Lovelace');
      await st.users.setPassword(ada.id, 'scrypt$a2', false, '2026-01-07T00:00:00.000Z');
      expect(await st.users.byId(ada.id)).toMatchObject({ role: 'operator', full_name: 'Ada Lovelace', password_hash: 'scrypt$a2', must_change_password: 0, password_changed_at: '2026-01-07T00:00:00.000Z', disabled_at: '2026-01-06T00:00:00.000Z' });
      await st.users.replaceHash(ada.id, 'scrypt$a3');
      expect((await st.users.byId(ada.id))?.password_changed_at).toBe('2026-01-07T00:00:00.000Z');
      expect(await st.users.activeAdministrators()).toBe(1);
      expect((await st.users.list()).map((u) => u.name)).toEqual(['Ada', 'bob']);
      expect(await st.users.count()).toBe(2);
      expect(await st.users.byId(999)).toBeNull();
    }));

    it('sessions: stored by token hash, touched, ended per user except one, purged when old', withStorage(async (st) => {
      const u = await st.users.insert({ name: 'olga', fullName: 'O', role: 'operator', passwordHash: 'h', mustChange: false, createdBy: 't', at: T0 });
      const row = (hash: string, t: number) => ({ token_hash: hash, user_id: u.id, csrf_token: `c-${hash}`, created_at: t, last_seen_at: t, expires_at: t + 1000, address: '10.0.0.1' });
      await st.sessions.insert(row('a', 100));
      await st.sessions.insert(row('b', 100));
      await st.sessions.insert(row('c', 500));
      await st.sessions.touch('a', 150);
      expect(await st.sessions.get('a')).toEqual({ ...row('a', 100), last_seen_at: 150 });
      expect(await st.sessions.deleteForUser(u.id, 'a')).toBe(2);
      expect(await st.sessions.get('b')).toBeNull();
      await st.sessions.insert(row('d', 2000));
      // expired by 1200 (a: expires 1100) or idle since 1500 or before (none else)
      expect(await st.sessions.purge(1200, 140)).toBe(1);
      expect(await st.sessions.get('d')).not.toBeNull();
      await st.sessions.delete('d');
      expect(await st.sessions.get('d')).toBeNull();
    }));

    it('login failures: put, read back, clear', withStorage(async (st) => {
      expect(await st.loginFailures.get('user:ada')).toBeNull();
      await st.loginFailures.put('user:ada', { failures: 3, lastFailureAt: 10, lockedUntil: 0 });
      await st.loginFailures.put('user:ada', { failures: 4, lastFailureAt: 20, lockedUntil: 2020 });
      expect(await st.loginFailures.get('user:ada')).toEqual({ failures: 4, lastFailureAt: 20, lockedUntil: 2020 });
      await st.loginFailures.clear('user:ada');
      expect(await st.loginFailures.get('user:ada')).toBeNull();
    }));

    it('analyzer tokens: found by hash while not revoked; revoked once; listed oldest first', withStorage(async (st) => {
      await st.analyzerTokens.insert({ id: 't1', analyzer: 'nir-1', label: 'probe', tokenHash: h('e'), createdAt: T0, createdBy: 'ada' });
      expect(await st.analyzerTokens.findActive(h('e'))).toMatchObject({ id: 't1', analyzer: 'nir-1', label: 'probe', revokedAt: null, lastUsedAt: null });
      await st.analyzerTokens.touch('t1', '2026-01-05T09:00:00.000Z');
      expect((await st.analyzerTokens.get('t1'))?.lastUsedAt).toBe('2026-01-05T09:00:00.000Z');
      expect(await st.analyzerTokens.revoke('t1', '2026-01-06T00:00:00.000Z', 'ada')).toBe(true);
      expect(await st.analyzerTokens.revoke('t1', '2026-01-07T00:00:00.000Z', 'bob')).toBe(false);
      expect(await st.analyzerTokens.findActive(h('e'))).toBeNull();
      await st.analyzerTokens.insert({ id: 'interim-3', analyzer: 'nir-2', label: '', tokenHash: h('f'), createdAt: '2026-01-04T00:00:00.000Z', createdBy: '' });
      expect((await st.analyzerTokens.list()).map((t) => [t.id, t.revokedBy])).toEqual([['interim-3', null], ['t1', 'ada']]);
      expect((await st.analyzerTokens.findActive(h('f')))?.analyzer).toBe('nir-2');
      await expect(st.analyzerTokens.insert({ id: 't2', analyzer: 'nir-3', label: '', tokenHash: h('f'), createdAt: T0, createdBy: 'ada' })).rejects.toThrow();
    }));

    it('a unit of work that fails leaves no user, session or token behind', withStorage(async (st) => {
      await expect(
        st.unitOfWork(async (u) => {
          const usr = await u.users.insert({ name: 'eve', fullName: 'E', role: 'viewer', passwordHash: 'h', mustChange: false, createdBy: 't', at: T0 });
          await u.sessions.insert({ token_hash: 's', user_id: usr.id, csrf_token: 'c', created_at: 1, last_seen_at: 1, expires_at: 2, address: null });
          await u.analyzerTokens.insert({ id: 't9', analyzer: 'nir-9', label: '', tokenHash: h('9'), createdAt: T0, createdBy: 'eve' });
          throw new Error('injected failure');
        }),
      ).rejects.toThrow('injected failure');
      expect(await st.users.byName('eve')).toBeNull();
      expect(await st.sessions.get('s')).toBeNull();
      expect(await st.analyzerTokens.get('t9')).toBeNull();
    }));
  });
}

/** Outbox rows as the ingest commit writes them (the signal side only reads them). */
async function writeOutbox(st: Pick<Storage, 'commitIngest'>, rows: [unit: string, seq: number, type?: string][]): Promise<string[]> {
  const w = emptyIngestWrite();
  w.outbox = rows.map(([unit, seq, type]) => ({ id: `${unit}#${seq}`, unit, unitSeq: seq, type: type ?? 'endpoint-state', payload: { n: seq, text: 'ä "q"' }, createdAt: 1000 + seq }));
  await st.commitIngest(w);
  return w.outbox.map((o) => o.id);
}

/** What the signal-delivery contract needs of a backend. */
export type SignalContractStorage = Pick<Storage, 'close' | 'commitIngest' | 'signals'>;

export function signalContract(name: string, backend: { open(): Promise<SignalContractStorage> }): void {
  const withStorage = (fn: (st: SignalContractStorage) => Promise<void>) => async () => {
    const st = await backend.open();
    try {
      await fn(st);
    } finally {
      await st.close();
    }
  };

  describe(`storage contract (${name}): signal delivery`, () => {
    it('pending rows above the cursor in seq order; delivered rows up to it; the cursor never moves back', withStorage(async (st) => {
      await writeOutbox(st, [['u2', 1], ['u1', 2], ['u1', 1], ['u1', 3]]);
      const s = st.signals;
      expect(await s.units()).toEqual(['u1', 'u2']);
      expect(await s.cursor('web', 'u1')).toBe(0);
      const p = await s.pending('web', 'u1');
      expect(p.map((r) => r.unit_seq)).toEqual([1, 2, 3]);
      expect(p[0]).toEqual({ id: 'u1#1', unit: 'u1', unit_seq: 1, type: 'endpoint-state', payload: JSON.stringify({ n: 1, text: 'ä "q"' }), created_at: 1001 });
      expect((await s.pending('web', 'u1', 2)).length).toBe(2);
      await s.markDelivered('web', p[1]!, 50);
      await s.markDelivered('web', p[0]!, 60); // behind the cursor: it stays at 2
      expect(await s.cursor('web', 'u1')).toBe(2);
      expect(await s.cursor('mqtt', 'u1')).toBe(0);
      expect((await s.pending('web', 'u1')).map((r) => r.unit_seq)).toEqual([3]);
      expect((await s.delivered('web', 'u1')).map((r) => r.unit_seq)).toEqual([1, 2]);
      expect((await s.delivered('web', 'u1', 1)).map((r) => r.unit_seq)).toEqual([2]);
      expect((await s.row('u2#1'))?.unit).toBe('u2');
      expect(await s.row('nope')).toBeNull();
    }));

    it('a channel registered at the end starts past the existing rows; registering again changes nothing', withStorage(async (st) => {
      await writeOutbox(st, [['u1', 1], ['u1', 2], ['u2', 1]]);
      expect(await st.signals.registerChannel('late', 10, true)).toBe(true);
      expect(await st.signals.registerChannel('replay', 10, false)).toBe(true);
      expect([await st.signals.cursor('late', 'u1'), await st.signals.cursor('late', 'u2'), await st.signals.cursor('replay', 'u1')]).toEqual([2, 1, 0]);
      await writeOutbox(st, [['u1', 3]]);
      expect(await st.signals.registerChannel('late', 20, true)).toBe(false);
      expect((await st.signals.pending('late', 'u1')).map((r) => r.unit_seq)).toEqual([3]);
    }));

    it('failed attempts, a dead letter that moves the cursor, requeue and its delivery', withStorage(async (st) => {
      const [a, b] = await writeOutbox(st, [['u1', 1], ['u1', 2]]);
      const s = st.signals;
      const row = (await s.pending('web', 'u1'))[0]!;
      await s.markFailed('web', row, 'HTTP 500 '.repeat(100), 100, 300, 1);
      await s.markFailed('web', row, 'HTTP 503', 300, 700, 2);
      expect(await s.attempt('web', a!)).toEqual({ channel: 'web', event_id: a, unit: 'u1', unit_seq: 1, attempts: 2, next_at: 700, last_error: 'HTTP 503', last_at: 300 });
      await s.markDead('web', row, 'x'.repeat(600), 800, 3);
      expect(await s.attempt('web', a!)).toBeNull();
      expect(await s.cursor('web', 'u1')).toBe(1);
      const dead = await s.deadLetter('web', a!);
      expect(dead).toMatchObject({ channel: 'web', event_id: a, unit: 'u1', unit_seq: 1, type: 'endpoint-state', attempts: 3, dead_at: 800, requeued_at: null, delivered_at: null });
      expect(dead!.last_error.length).toBe(500);
      await s.markDead('other', (await s.pending('other', 'u1'))[1]!, 'gone', 900, 1);
      expect((await s.deadLetters()).map((d) => d.channel)).toEqual(['other', 'web']);
      expect((await s.deadLetters({ channel: 'web', unit: 'u1' })).map((d) => d.event_id)).toEqual([a]);
      expect(await s.deadLetters({ unit: 'u9' })).toEqual([]);
      expect(await s.requeue('web', 'nope', 1000)).toBe(false);
      expect(await s.requeue('web', a!, 1000)).toBe(true);
      expect((await s.requeued('web')).map((d) => d.event_id)).toEqual([a]);
      await s.markDeadDelivered('web', a!, 1100);
      expect(await s.requeued('web')).toEqual([]);
      expect(await s.deadLetter('web', a!)).toMatchObject({ requeued_at: 1000, delivered_at: 1100 });
      expect((await s.pending('web', 'u1')).map((r) => r.id)).toEqual([b]);
    }));

    it('endpoint latches: set once per event, acknowledged once, kept per unit', withStorage(async (st) => {
      const l = st.signals.latches;
      expect(await l.get('u1')).toBeNull();
      expect(await l.set('u1', 'B-1', 500, 'moisture at target', 'e1')).toEqual({ unit: 'u1', batch: 'B-1', reached: 1, reached_at: 500, reason: 'moisture at target', event_id: 'e1', acknowledged_at: null, acknowledged_by: null });
      expect(await l.set('u1', 'B-1', 500, 'moisture at target', 'e1')).toBeNull();
      await l.set('u2', null, 600, '', 'e2');
      expect(await l.acknowledge('u1', 'dcs', 700)).toMatchObject({ reached: 1, event_id: 'e1' });
      expect(await l.acknowledge('u1', 'dcs', 800)).toBeNull();
      expect(await l.acknowledge('u9', 'dcs', 800)).toBeNull();
      expect(await l.get('u1')).toMatchObject({ reached: 0, acknowledged_at: 700, acknowledged_by: 'dcs' });
      expect((await l.all()).map((x) => [x.unit, x.reached])).toEqual([['u1', 0], ['u2', 1]]);
      expect(await l.set('u1', 'B-2', 900, 'again', 'e3')).toMatchObject({ reached: 1, batch: 'B-2', acknowledged_at: null });
    }));
  });
}

/** What the model-life contract needs of a backend. */
export type ModelLifeContractStorage = ContractStorage & Pick<Storage, 'modelLife' | 'commitIngest'>;

export function modelLifeContract(name: string, backend: { open(): Promise<ModelLifeContractStorage> }): void {
  const withStorage = (fn: (st: ModelLifeContractStorage) => Promise<void>) => async () => {
    const st = await backend.open();
    try {
      await st.createUnit({ id: 'dryer-1', name: 'dryer-1', kind: 'dryer', description: '', createdAt: 0 });
      await st.createAnalyzer({ id: 'nir-1', name: 'nir-1', createdAt: 0 });
      await draftModel(st, 'v1');
      await draftModel(st, 'v2');
      await fn(st);
    } finally {
      await st.close();
    }
  };
  const run = (id: string, over: Partial<ShadowRunRow> = {}): ShadowRunRow => ({
    id, unit: 'dryer-1', modelVersion: 'v2', deployedVersion: 'v1', startedAt: 100, startedBy: 'mo', reason: 'compare', endedAt: null, endedBy: null, endReason: null, ...over,
  });
  /** A stored result: the contract only needs it to come back as written. */
  const result = (seq: number, t2: number) => ({ seq, t: 1000 + seq, t2, q: 0.5, scores: [seq, -seq], conditionChanges: [] }) as unknown as MonitorResult;

  describe(`storage contract (${name}): model life`, () => {
    it('shadow runs: one listed per unit while active, ended once', withStorage(async (ml) => {
      const s = ml.modelLife;
      await s.insertRun(run('r1', { startedAt: 100 }));
      expect(await s.getRun('r1')).toEqual(run('r1'));
      expect((await s.activeRun('dryer-1'))?.id).toBe('r1');
      expect(await s.endRun('r1', 200, 'mo', 'enough')).toBe(true);
      expect(await s.endRun('r1', 300, 'mo', 'again')).toBe(false);
      expect(await s.activeRun('dryer-1')).toBeNull();
      await s.insertRun(run('r2', { startedAt: 400, modelVersion: 'v1', deployedVersion: null }));
      expect((await s.listRuns({})).map((r) => r.id)).toEqual(['r2', 'r1']);
      expect((await s.listRuns({ active: false })).map((r) => r.id)).toEqual(['r1']);
      expect((await s.listRuns({ versionId: 'v1', unit: 'dryer-1' })).map((r) => r.id)).toEqual(['r2']);
      expect(await s.getRun('r1')).toMatchObject({ endedAt: 200, endedBy: 'mo', endReason: 'enough' });
      expect(await s.getRun('nope')).toBeNull();
    }));

    it('batches a run judged, its results and the deployed results, as the ingest commit wrote them', withStorage(async (st) => {
      await st.modelLife.insertRun(run('r1'));
      const w = emptyIngestWrite();
      for (const [i, id] of ['B-2', 'B-1'].entries()) {
        w.batchStarts.push({ id, unit: 'dryer-1', analyzer: 'nir-1', boot: 1, product: 'granule A', startSeq: i * 10, startT: 5000 - i * 1000, axis: new Float64Array([1100, 1102]), modelVersion: 'v1', createdAt: 0 });
        w.shadowBatches!.push({ run: 'r1', batch: id });
        for (let k = 0; k < 2; k++) {
          w.spectra.push({ batch: id, idx: k, seq: i * 10 + k + 1, t: 1000 + k, values: new Float32Array([0.1, 0.2]), analyzer: 'nir-1', boot: 1, receivedAt: 0 });
          w.results.push({ batch: id, idx: k, modelVersion: 'v1', result: result(i * 10 + k + 1, 1 + k) });
          w.shadowResults!.push({ run: 'r1', batch: id, idx: k, result: result(i * 10 + k + 1, 2 + k) });
        }
      }
      w.batchEnds.push({ batch: 'B-1', endSeq: 20, endT: 6000, endReason: null });
      await st.commitIngest(w);
      const s = st.modelLife;
      expect(await s.batchCount('r1')).toBe(2);
      expect(await s.runBatches('r1')).toEqual([
        { id: 'B-1', startT: 4000, status: 'ended', modelVersion: 'v1' },
        { id: 'B-2', startT: 5000, status: 'open', modelVersion: 'v1' },
      ]);
      expect(await s.shadowResults('r1', 'B-1')).toEqual([{ idx: 0, result: result(11, 2) }, { idx: 1, result: result(12, 3) }]);
      expect((await s.results('B-1')).map((x) => [x.idx, x.result.t2])).toEqual([[0, 1], [1, 2]]);
      expect(await s.batchesJudgedBy('v1')).toEqual([{ id: 'B-1', unit: 'dryer-1', startT: 4000 }]);
      expect(await s.batchesJudgedBy('v2')).toEqual([]);
    }));

    it('periodic review: set, replaced, read back', withStorage(async (st) => {
      expect(await st.modelLife.review('v1')).toBeNull();
      await st.modelLife.setReview('v1', 365, 9000, 100, 'mo');
      await st.modelLife.setReview('v1', 180, 7000, 200, 'qa');
      expect(await st.modelLife.review('v1')).toEqual({ dueAt: 7000, intervalDays: 180 });
    }));

    it('promote in one unit of work: deploy + end the run + review; a failure leaves none of them', withStorage(async (st) => {
      await st.approveModelVersion('v2', 'qa', 10, 'ok');
      await st.modelLife.insertRun(run('r1'));
      const d = { id: 'd1', unit: 'dryer-1', modelVersion: 'v2', deployedAt: 300, deployedBy: 'mo', reason: 'promote', endedAt: null };
      await expect(
        st.unitOfWork(async (u) => {
          await u.models.deploy(d);
          await u.modelLife!.endRun('r1', 300, 'mo', 'promoted');
          await u.modelLife!.setReview('v2', 365, 9000, 300, 'mo');
          throw new Error('injected failure');
        }),
      ).rejects.toThrow('injected failure');
      expect(await st.activeDeployment('dryer-1')).toBeNull();
      expect((await st.modelLife.activeRun('dryer-1'))?.id).toBe('r1');
      expect(await st.modelLife.review('v2')).toBeNull();
      await st.unitOfWork(async (u) => {
        await u.models.deploy(d);
        expect(await u.modelLife!.endRun('r1', 300, 'mo', 'promoted')).toBe(true);
      });
      expect((await st.activeDeployment('dryer-1'))?.modelVersion).toBe('v2');
      expect(await st.modelLife.activeRun('dryer-1')).toBeNull();
    }));
  });
}
