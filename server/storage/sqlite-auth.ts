/**
 * The access-control tables on SQLite (migrations/201-auth.sql): users, sessions, login failures,
 * analyzer tokens — and the server core's own token table (001) for listing and revoking.
 */
import type Database from 'better-sqlite3';
import { tokenFromRow, type TokenRow } from './row-mappers.ts';
import type {
  AnalyzerTokenRepository,
  AnalyzerTokenRow,
  AuthRepositories,
  LoginFailureRepository,
  LoginFailureRow,
  NewUser,
  SessionRepository,
  SessionRow,
  UserRepository,
  UserRow,
} from './repositories.ts';

class SqliteUsers implements UserRepository {
  private readonly byIdStmt;
  private readonly byNameStmt;
  constructor(private readonly db: Database.Database) {
    this.byIdStmt = db.prepare<[number], UserRow>('SELECT * FROM auth_users WHERE id = ?');
    this.byNameStmt = db.prepare<[string], UserRow>('SELECT * FROM auth_users WHERE name = ?');
  }
  async byName(name: string) {
    return this.byNameStmt.get(name) ?? null;
  }
  async byId(id: number) {
    return this.byIdStmt.get(id) ?? null;
  }
  async list() {
    return this.db.prepare('SELECT * FROM auth_users ORDER BY name').all() as UserRow[];
  }
  async count() {
    return (this.db.prepare('SELECT count(*) AS n FROM auth_users').get() as { n: number }).n;
  }
  async insert(u: NewUser) {
    const info = this.db
      .prepare('INSERT INTO auth_users (name, full_name, role, password_hash, must_change_password, created_at, created_by, password_changed_at) VALUES (?,?,?,?,?,?,?,?)')
      .run(u.name, u.fullName, u.role, u.passwordHash, u.mustChange ? 1 : 0, u.at, u.createdBy, u.at);
    return this.byIdStmt.get(Number(info.lastInsertRowid))!;
  }
  async setPassword(id: number, passwordHash: string, mustChange: boolean, at: string) {
    this.db.prepare('UPDATE auth_users SET password_hash = ?, must_change_password = ?, password_changed_at = ? WHERE id = ?').run(passwordHash, mustChange ? 1 : 0, at, id);
  }
  async replaceHash(id: number, passwordHash: string) {
    this.db.prepare('UPDATE auth_users SET password_hash = ? WHERE id = ?').run(passwordHash, id);
  }
  async setRole(id: number, role: string) {
    this.db.prepare('UPDATE auth_users SET role = ? WHERE id = ?').run(role, id);
  }
  async setFullName(id: number, fullName: string) {
    this.db.prepare('UPDATE auth_users SET full_name = ? WHERE id = ?').run(fullName, id);
  }
  async setDisabled(id: number, at: string | null) {
    this.db.prepare('UPDATE auth_users SET disabled_at = ? WHERE id = ?').run(at, id);
  }
  async activeAdministrators() {
    return (this.db.prepare("SELECT count(*) AS n FROM auth_users WHERE role = 'administrator' AND disabled_at IS NULL").get() as { n: number }).n;
  }
}

class SqliteSessions implements SessionRepository {
  private readonly getStmt;
  constructor(private readonly db: Database.Database) {
    this.getStmt = db.prepare<[string], SessionRow>('SELECT * FROM auth_sessions WHERE token_hash = ?');
  }
  async insert(s: SessionRow) {
    this.db
      .prepare('INSERT INTO auth_sessions (token_hash, user_id, csrf_token, created_at, last_seen_at, expires_at, address) VALUES (?,?,?,?,?,?,?)')
      .run(s.token_hash, s.user_id, s.csrf_token, s.created_at, s.last_seen_at, s.expires_at, s.address);
  }
  async get(tokenHash: string) {
    return this.getStmt.get(tokenHash) ?? null;
  }
  async touch(tokenHash: string, at: number) {
    this.db.prepare('UPDATE auth_sessions SET last_seen_at = ? WHERE token_hash = ?').run(at, tokenHash);
  }
  async delete(tokenHash: string) {
    this.db.prepare('DELETE FROM auth_sessions WHERE token_hash = ?').run(tokenHash);
  }
  async deleteForUser(userId: number, keepTokenHash?: string) {
    if (keepTokenHash) return this.db.prepare('DELETE FROM auth_sessions WHERE user_id = ? AND token_hash <> ?').run(userId, keepTokenHash).changes;
    return this.db.prepare('DELETE FROM auth_sessions WHERE user_id = ?').run(userId).changes;
  }
  async purge(now: number, idleBefore: number) {
    return this.db.prepare('DELETE FROM auth_sessions WHERE expires_at <= ? OR last_seen_at <= ?').run(now, idleBefore).changes;
  }
}

class SqliteLoginFailures implements LoginFailureRepository {
  private readonly getStmt;
  private readonly putStmt;
  private readonly clearStmt;
  constructor(db: Database.Database) {
    this.getStmt = db.prepare<[string], { failures: number; last_failure_at: number; locked_until: number }>('SELECT failures, last_failure_at, locked_until FROM auth_login_failures WHERE key = ?');
    this.putStmt = db.prepare(
      'INSERT INTO auth_login_failures (key, failures, last_failure_at, locked_until) VALUES (?,?,?,?) ' +
        'ON CONFLICT(key) DO UPDATE SET failures = excluded.failures, last_failure_at = excluded.last_failure_at, locked_until = excluded.locked_until',
    );
    this.clearStmt = db.prepare('DELETE FROM auth_login_failures WHERE key = ?');
  }
  async get(key: string): Promise<LoginFailureRow | null> {
    const r = this.getStmt.get(key);
    return r ? { failures: r.failures, lastFailureAt: r.last_failure_at, lockedUntil: r.locked_until } : null;
  }
  async put(key: string, r: LoginFailureRow) {
    this.putStmt.run(key, r.failures, r.lastFailureAt, r.lockedUntil);
  }
  async clear(key: string) {
    this.clearStmt.run(key);
  }
}

class SqliteAnalyzerTokens implements AnalyzerTokenRepository {
  private readonly findStmt;
  constructor(private readonly db: Database.Database) {
    this.findStmt = db.prepare<[string], TokenRow>('SELECT * FROM auth_analyzer_tokens WHERE token_hash = ? AND revoked_at IS NULL');
  }
  async insert(t: Omit<AnalyzerTokenRow, 'revokedAt' | 'revokedBy' | 'lastUsedAt'>) {
    this.db
      .prepare('INSERT INTO auth_analyzer_tokens (id, analyzer, label, token_hash, created_at, created_by) VALUES (?,?,?,?,?,?)')
      .run(t.id, t.analyzer, t.label, t.tokenHash, t.createdAt, t.createdBy);
  }
  async findActive(tokenHash: string) {
    const r = this.findStmt.get(tokenHash);
    return r ? tokenFromRow(r) : null;
  }
  async touch(id: string, at: string) {
    this.db.prepare('UPDATE auth_analyzer_tokens SET last_used_at = ? WHERE id = ?').run(at, id);
  }
  async get(id: string) {
    const r = this.db.prepare('SELECT * FROM auth_analyzer_tokens WHERE id = ?').get(id) as TokenRow | undefined;
    return r ? tokenFromRow(r) : null;
  }
  async list() {
    return (this.db.prepare('SELECT * FROM auth_analyzer_tokens ORDER BY created_at, id').all() as TokenRow[]).map(tokenFromRow);
  }
  async revoke(id: string, at: string, by: string) {
    return this.db.prepare('UPDATE auth_analyzer_tokens SET revoked_at = ?, revoked_by = ? WHERE id = ? AND revoked_at IS NULL').run(at, by, id).changes === 1;
  }
}

export function sqliteAuthRepositories(db: Database.Database): AuthRepositories {
  return { users: new SqliteUsers(db), sessions: new SqliteSessions(db), loginFailures: new SqliteLoginFailures(db), analyzerTokens: new SqliteAnalyzerTokens(db) };
}
