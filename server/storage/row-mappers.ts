/**
 * Rows of the GMP tables as both backends read them (same column names on SQLite and PostgreSQL),
 * and the one mapping of each to the record the rest of the server uses, so the two backends
 * cannot come to disagree on a field.
 */
import type { AuditRecord } from '../../core/api/audit.ts';
import type { Role, SignatureMeaning, SignatureRecord } from '../auth/types.ts';
import type { AnalyzerTokenRow } from './repositories.ts';

export interface AuditRow {
  seq: number;
  at: string;
  user: string;
  action: string;
  object: string;
  before: string | null;
  after: string | null;
  reason: string | null;
  prev_hash: string;
  hash: string;
}

export function auditFromRow(r: AuditRow): AuditRecord {
  return { seq: r.seq, at: r.at, user: r.user, action: r.action, object: r.object, before: r.before, after: r.after, reason: r.reason, prevHash: r.prev_hash, hash: r.hash };
}

export interface TokenRow {
  id: string;
  analyzer: string;
  label: string;
  token_hash: string;
  created_at: string;
  created_by: string;
  revoked_at: string | null;
  revoked_by: string | null;
  last_used_at: string | null;
}

export function tokenFromRow(r: TokenRow): AnalyzerTokenRow {
  return {
    id: r.id, analyzer: r.analyzer, label: r.label, tokenHash: r.token_hash, createdAt: r.created_at, createdBy: r.created_by,
    revokedAt: r.revoked_at, revokedBy: r.revoked_by, lastUsedAt: r.last_used_at,
  };
}

export interface SignatureRow {
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

export function signatureFromRow(r: SignatureRow): SignatureRecord {
  return {
    id: r.id, userName: r.user_name, fullName: r.full_name, role: r.role as Role, meaning: r.meaning as SignatureMeaning,
    objectType: r.object_type, objectId: r.object_id, objectHash: r.object_hash, reason: r.reason, override: r.override ?? null,
    signedAt: r.signed_at, auditSeq: r.audit_seq,
  };
}
