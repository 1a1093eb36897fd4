/** Electronic signature records on SQLite (table auth_signatures, append-only; migrations 201, 202). */
import type Database from 'better-sqlite3';
import type { SignatureRecord } from '../auth/types.ts';
import { signatureFromRow, type SignatureRow } from './row-mappers.ts';
import type { NewSignature, SignatureRepository } from './repositories.ts';

export class SqliteSignatureRepository implements SignatureRepository {
  constructor(private readonly db: Database.Database) {}

  async insert(s: NewSignature): Promise<SignatureRecord> {
    const info = this.db
      .prepare(
        'INSERT INTO auth_signatures (user_id, user_name, full_name, role, meaning, object_type, object_id, object_hash, reason, override, signed_at, audit_seq) VALUES (?,?,?,?,?,?,?,?,?,?,?,?)',
      )
      .run(s.userId, s.userName, s.fullName, s.role, s.meaning, s.objectType, s.objectId, s.objectHash, s.reason, s.override, s.signedAt, s.auditSeq);
    return signatureFromRow(this.db.prepare('SELECT * FROM auth_signatures WHERE id = ?').get(Number(info.lastInsertRowid)) as SignatureRow);
  }

  async forObject(objectType: string, objectId: string): Promise<SignatureRecord[]> {
    return (
      this.db.prepare('SELECT * FROM auth_signatures WHERE object_type = ? AND object_id = ? ORDER BY id').all(objectType, objectId) as SignatureRow[]
    ).map(signatureFromRow);
  }

  async list(limit = 500): Promise<SignatureRecord[]> {
    return (this.db.prepare('SELECT * FROM auth_signatures ORDER BY id DESC LIMIT ?').all(limit) as SignatureRow[]).map(signatureFromRow);
  }
}
