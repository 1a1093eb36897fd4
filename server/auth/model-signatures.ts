/**
 * Electronic signatures on a model version, for every view that shows the model
 * (ModelVersionSummary.signatures). Reads table auth_signatures on the shared database handle;
 * an empty list when the table is not there (auth tables not migrated).
 */
import type Database from 'better-sqlite3';
import type { ModelSignature } from '../../core/api/rest.ts';
import { SignatureStore } from './signature-store.ts';

const stores = new WeakMap<object, SignatureStore | null>();

function isDb(x: unknown): x is Database.Database {
  return typeof x === 'object' && x !== null && typeof (x as { prepare?: unknown }).prepare === 'function';
}

export function modelSignatures(db: unknown, versionId: string): ModelSignature[] {
  if (!isDb(db)) return [];
  let store = stores.get(db);
  if (store === undefined) {
    const has = db.prepare("SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = 'auth_signatures'").get();
    store = has ? new SignatureStore(db) : null;
    stores.set(db, store);
  }
  if (!store) return [];
  return store.forObject('model', versionId).map((s) => ({
    signer: s.userName,
    signerFullName: s.fullName,
    signerRole: s.role,
    meaning: s.meaning,
    modelSha256: s.objectHash,
    reason: s.reason,
    override: s.override,
    signedAt: Date.parse(s.signedAt),
    auditSeq: s.auditSeq,
  }));
}
