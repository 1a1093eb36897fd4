/** Electronic signature records on SQLite (table auth_signatures, append-only; migrations 201, 202). */
import type Database from 'better-sqlite3';
import type { Role, SignatureMeaning, SignatureRecord } from '../auth/types.ts';
import type { NewSignature, SignatureRepository } from './repositories.ts';

interface Row {
  id: number;
  user_id: number;
  user_name: string;
  full_name: string;
  role: string;
  meaning: string;
  object_type: string;
  object_id: string;
  object_hash: string;
  reason: string;
  override: string | null;
  signed_at: string;
  audit_seq: number;
}

function view(r: Row): SignatureRecord {
  return {
    id: r.id,
    userName: r.user_name,
    fullName: r.full_name,
    role: r.role as Role,
    meaning: r.meaning as SignatureMeaning,
    objectType: r.object_type,
    objectId: r.object_id,
    objectHash: r.object_hash,
    reason: r.reason,
    override: r.override ?? null,
    signedAt: r.signed_at,
    auditSeq: r.audit_seq,
  };
}

export class SqliteSignatureRepository implements SignatureRepository {
  constructor(private readonly db: Database.Database) {}

  async insert(s: NewSignature): Promise<SignatureRecord> {
    const info = this.db
      .prepare(
        'INSERT INTO auth_signatures (user_id, user_name, full_name, role, meaning, object_type, object_id, object_hash, reason, override, signed_at, audit_seq) VALUES (?,?,?,?,?,?,?,?,?,?,?,?)',
      )
      .run(s.userId, s.userName, s.fullName, s.role, s.meaning, s.objectType, s.objectId, s.objectHash, s.reason, s.override, s.signedAt, s.auditSeq);
    return view(this.db.prepare('SELECT * FROM auth_signatures WHERE id = ?').get(Number(info.lastInsertRowid)) as Row);
  }

  async forObject(objectType: string, objectId: string): Promise<SignatureRecord[]> {
    return (
      this.db.prepare('SELECT * FROM auth_signatures WHERE object_type = ? AND object_id = ? ORDER BY id').all(objectType, objectId) as Row[]
    ).map(view);
  }

  async list(limit = 500): Promise<SignatureRecord[]> {
    return (this.db.prepare('SELECT * FROM auth_signatures ORDER BY id DESC LIMIT ?').all(limit) as Row[]).map(view);
  }
}
