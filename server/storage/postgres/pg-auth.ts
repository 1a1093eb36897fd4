/**
 * The access-control tables and electronic signatures on PostgreSQL (migrations/201-auth.sql):
 * users, sessions, login failures, analyzer tokens, signatures — and the server core's own token
 * table (001-core.sql) for listing and revoking.
 */
import { signatureFromRow, tokenFromRow, type SignatureRow, type TokenRow } from '../row-mappers.ts';
import type { SignatureRecord } from '../../auth/types.ts';
import type {
  AnalyzerTokenRepository,
  AnalyzerTokenRow,
  AuthRepositories,
  LoginFailureRepository,
  LoginFailureRow,
  NewSignature,
  NewUser,
  SessionRepository,
  SessionRow,
  SignatureRepository,
  UserRepository,
  UserRow,
} from '../repositories.ts';
import type { Q } from './pg-types.ts';

class PgUsers implements UserRepository {
  constructor(private readonly sql: Q) {}
  async byName(name: string) {
    const [r] = await this.sql<UserRow[]>`SELECT * FROM auth_users WHERE lower(name) = lower(${name})`;
    return r ?? null;
  }
  async byId(id: number) {
    const [r] = await this.sql<UserRow[]>`SELECT * FROM auth_users WHERE id = ${id}`;
    return r ?? null;
  }
  /** By name regardless of case, as SQLite's NOCASE column orders them (for ASCII names). */
  async list() {
    return [...(await this.sql<UserRow[]>`SELECT * FROM auth_users ORDER BY lower(name) COLLATE "C", name COLLATE "C"`)];
  }
  async count() {
    return (await this.sql<{ n: number }[]>`SELECT count(*) AS n FROM auth_users`)[0]!.n;
  }
  async insert(u: NewUser) {
    const [r] = await this.sql<UserRow[]>`
      INSERT INTO auth_users (name, full_name, role, password_hash, must_change_password, created_at, created_by, password_changed_at)
      VALUES (${u.name}, ${u.fullName}, ${u.role}, ${u.passwordHash}, ${u.mustChange ? 1 : 0}, ${u.at}, ${u.createdBy}, ${u.at}) RETURNING *`;
    return r!;
  }
  async setPassword(id: number, passwordHash: string, mustChange: boolean, at: string) {
    await this.sql`UPDATE auth_users SET password_hash = ${passwordHash}, must_change_password = ${mustChange ? 1 : 0}, password_changed_at = ${at} WHERE id = ${id}`;
  }
  async replaceHash(id: number, passwordHash: string) {
    await this.sql`UPDATE auth_users SET password_hash = ${passwordHash} WHERE id = ${id}`;
  }
  async setRole(id: number, role: string) {
    await this.sql`UPDATE auth_users SET role = ${role} WHERE id = ${id}`;
  }
  async setFullName(id: number, fullName: string) {
    await this.sql`UPDATE auth_users SET full_name = ${fullName} WHERE id = ${id}`;
  }
  async setDisabled(id: number, at: string | null) {
    await this.sql`UPDATE auth_users SET disabled_at = ${at} WHERE id = ${id}`;
  }
  async activeAdministrators() {
    return (await this.sql<{ n: number }[]>`SELECT count(*) AS n FROM auth_users WHERE role = 'administrator' AND disabled_at IS NULL`)[0]!.n;
  }
}

class PgSessions implements SessionRepository {
  constructor(private readonly sql: Q) {}
  async insert(s: SessionRow) {
    await this.sql`INSERT INTO auth_sessions (token_hash, user_id, csrf_token, created_at, last_seen_at, expires_at, address)
      VALUES (${s.token_hash}, ${s.user_id}, ${s.csrf_token}, ${s.created_at}, ${s.last_seen_at}, ${s.expires_at}, ${s.address})`;
  }
  async get(tokenHash: string) {
    const [r] = await this.sql<SessionRow[]>`SELECT * FROM auth_sessions WHERE token_hash = ${tokenHash}`;
    return r ? { ...r } : null;
  }
  async touch(tokenHash: string, at: number) {
    await this.sql`UPDATE auth_sessions SET last_seen_at = ${at} WHERE token_hash = ${tokenHash}`;
  }
  async delete(tokenHash: string) {
    await this.sql`DELETE FROM auth_sessions WHERE token_hash = ${tokenHash}`;
  }
  async deleteForUser(userId: number, keepTokenHash?: string) {
    const r = keepTokenHash
      ? await this.sql`DELETE FROM auth_sessions WHERE user_id = ${userId} AND token_hash <> ${keepTokenHash}`
      : await this.sql`DELETE FROM auth_sessions WHERE user_id = ${userId}`;
    return r.count;
  }
  async purge(now: number, idleBefore: number) {
    return (await this.sql`DELETE FROM auth_sessions WHERE expires_at <= ${now} OR last_seen_at <= ${idleBefore}`).count;
  }
}

class PgLoginFailures implements LoginFailureRepository {
  constructor(private readonly sql: Q) {}
  async get(key: string): Promise<LoginFailureRow | null> {
    const [r] = await this.sql<{ failures: number; last_failure_at: number; locked_until: number }[]>`
      SELECT failures, last_failure_at, locked_until FROM auth_login_failures WHERE key = ${key}`;
    return r ? { failures: r.failures, lastFailureAt: r.last_failure_at, lockedUntil: r.locked_until } : null;
  }
  async put(key: string, r: LoginFailureRow) {
    await this.sql`INSERT INTO auth_login_failures (key, failures, last_failure_at, locked_until) VALUES (${key}, ${r.failures}, ${r.lastFailureAt}, ${r.lockedUntil})
      ON CONFLICT (key) DO UPDATE SET failures = excluded.failures, last_failure_at = excluded.last_failure_at, locked_until = excluded.locked_until`;
  }
  async clear(key: string) {
    await this.sql`DELETE FROM auth_login_failures WHERE key = ${key}`;
  }
}

class PgAnalyzerTokens implements AnalyzerTokenRepository {
  constructor(private readonly sql: Q) {}
  async insert(t: Omit<AnalyzerTokenRow, 'revokedAt' | 'revokedBy' | 'lastUsedAt'>) {
    await this.sql`INSERT INTO auth_analyzer_tokens (id, analyzer, label, token_hash, created_at, created_by)
      VALUES (${t.id}, ${t.analyzer}, ${t.label}, ${t.tokenHash}, ${t.createdAt}, ${t.createdBy})`;
  }
  async findActive(tokenHash: string) {
    const [r] = await this.sql<TokenRow[]>`SELECT * FROM auth_analyzer_tokens WHERE token_hash = ${tokenHash} AND revoked_at IS NULL`;
    return r ? tokenFromRow(r) : null;
  }
  async touch(id: string, at: string) {
    await this.sql`UPDATE auth_analyzer_tokens SET last_used_at = ${at} WHERE id = ${id}`;
  }
  async get(id: string) {
    const [r] = await this.sql<TokenRow[]>`SELECT * FROM auth_analyzer_tokens WHERE id = ${id}`;
    return r ? tokenFromRow(r) : null;
  }
  async list() {
    return (await this.sql<TokenRow[]>`SELECT * FROM auth_analyzer_tokens ORDER BY created_at COLLATE "C", id COLLATE "C"`).map(tokenFromRow);
  }
  async revoke(id: string, at: string, by: string) {
    return (await this.sql`UPDATE auth_analyzer_tokens SET revoked_at = ${at}, revoked_by = ${by} WHERE id = ${id} AND revoked_at IS NULL`).count === 1;
  }
}

export function pgAuthRepositories(sql: Q): AuthRepositories {
  return { users: new PgUsers(sql), sessions: new PgSessions(sql), loginFailures: new PgLoginFailures(sql), analyzerTokens: new PgAnalyzerTokens(sql) };
}

/** Electronic signature records (table auth_signatures, append-only). */
export class PgSignatureRepository implements SignatureRepository {
  constructor(private readonly sql: Q) {}

  async insert(s: NewSignature): Promise<SignatureRecord> {
    const [r] = await this.sql<SignatureRow[]>`
      INSERT INTO auth_signatures (user_id, user_name, full_name, role, meaning, object_type, object_id, object_hash, reason, override, signed_at, audit_seq)
      VALUES (${s.userId}, ${s.userName}, ${s.fullName}, ${s.role}, ${s.meaning}, ${s.objectType}, ${s.objectId}, ${s.objectHash}, ${s.reason}, ${s.override}, ${s.signedAt}, ${s.auditSeq})
      RETURNING *`;
    return signatureFromRow(r!);
  }

  async forObject(objectType: string, objectId: string): Promise<SignatureRecord[]> {
    return (await this.sql<SignatureRow[]>`SELECT * FROM auth_signatures WHERE object_type = ${objectType} AND object_id = ${objectId} ORDER BY id`).map(signatureFromRow);
  }

  async list(limit = 500): Promise<SignatureRecord[]> {
    return (await this.sql<SignatureRow[]>`SELECT * FROM auth_signatures ORDER BY id DESC LIMIT ${limit}`).map(signatureFromRow);
  }
}
