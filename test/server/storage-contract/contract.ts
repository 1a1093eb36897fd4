/**
 * The storage contract: what every storage backend must do for the parts beside ingest (audit,
 * signatures, signed model changes, units of work). Written against the interfaces in
 * server/storage/ only; sqlite.test.ts runs it on the embedded SQLite backend, pg.test.ts on
 * PostgreSQL, each with its own `open`.
 */
import { describe, expect, it } from 'vitest';
import type { AuditRecord } from '../../../core/api/audit.ts';
import { ChainedAuditTrail } from '../../../server/audit/audit-trail.ts';
import type { Storage } from '../../../server/storage/storage.ts';
import type { NewSignature } from '../../../server/storage/repositories.ts';

/** The parts of Storage this contract exercises (a backend may implement more). */
export type ContractStorage = Pick<
  Storage,
  | 'close' | 'unitOfWork' | 'audit' | 'signatures' | 'users' | 'sessions' | 'loginFailures' | 'analyzerTokens'
  | 'createUnit' | 'createAnalyzer' | 'addAnalyzerToken' | 'findAnalyzerByTokenHash'
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

    it('analyzer tokens: found by hash while not revoked; revoked once; the core tokens listed and revocable', withStorage(async (st) => {
      await st.analyzerTokens.insert({ id: 't1', analyzer: 'nir-1', label: 'probe', tokenHash: h('e'), createdAt: T0, createdBy: 'ada' });
      expect(await st.analyzerTokens.findActive(h('e'))).toMatchObject({ id: 't1', analyzer: 'nir-1', label: 'probe', revokedAt: null, lastUsedAt: null });
      await st.analyzerTokens.touch('t1', '2026-01-05T09:00:00.000Z');
      expect((await st.analyzerTokens.get('t1'))?.lastUsedAt).toBe('2026-01-05T09:00:00.000Z');
      expect(await st.analyzerTokens.revoke('t1', '2026-01-06T00:00:00.000Z', 'ada')).toBe(true);
      expect(await st.analyzerTokens.revoke('t1', '2026-01-07T00:00:00.000Z', 'bob')).toBe(false);
      expect(await st.analyzerTokens.findActive(h('e'))).toBeNull();
      expect(await st.analyzerTokens.list()).toMatchObject([{ id: 't1', revokedBy: 'ada' }]);
      await st.createAnalyzer({ id: 'nir-2', name: 'nir-2', createdAt: 5 });
      await st.addAnalyzerToken('nir-2', h('f'), 5);
      const [core] = await st.analyzerTokens.listCore();
      expect(core).toMatchObject({ analyzer: 'nir-2', createdAt: 5, revokedAt: null });
      expect(await st.findAnalyzerByTokenHash(h('f'))).toBe('nir-2');
      expect(await st.analyzerTokens.revokeCore(core!.id, 9)).toBe(true);
      expect(await st.analyzerTokens.revokeCore(core!.id, 10)).toBe(false);
      expect(await st.findAnalyzerByTokenHash(h('f'))).toBeNull();
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
