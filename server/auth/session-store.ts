/**
 * Login sessions (table auth_sessions). The browser holds a random 256-bit token in an
 * HTTP-only cookie; the table holds only its SHA-256, so a copy of the database does not give
 * anyone a live session. Each session has its own CSRF token (sent back in x-csrf-token).
 */
import type Database from 'better-sqlite3';
import { createHash, randomBytes } from 'node:crypto';

export function sha256Hex(s: string): string {
  return createHash('sha256').update(s, 'utf8').digest('hex');
}

export function randomToken(bytes = 32): string {
  return randomBytes(bytes).toString('base64url');
}

export interface SessionRow {
  token_hash: string;
  user_id: number;
  csrf_token: string;
  created_at: number;
  last_seen_at: number;
  expires_at: number;
  address: string | null;
}

export interface SessionTimes {
  /** A session ends this long after the last request. */
  idleMs: number;
  /** …and at the latest this long after login. */
  maxMs: number;
}

export const DEFAULT_SESSION_TIMES: SessionTimes = { idleMs: 8 * 3600_000, maxMs: 12 * 3600_000 };

export class SessionStore {
  constructor(
    private readonly db: Database.Database,
    readonly times: SessionTimes,
    private readonly now: () => number,
  ) {}

  create(userId: number, address: string | null): { token: string; csrf: string; expiresAt: number } {
    const token = randomToken();
    const csrf = randomToken();
    const t = this.now();
    const expiresAt = t + this.times.maxMs;
    this.db
      .prepare('INSERT INTO auth_sessions (token_hash, user_id, csrf_token, created_at, last_seen_at, expires_at, address) VALUES (?,?,?,?,?,?,?)')
      .run(sha256Hex(token), userId, csrf, t, t, expiresAt, address);
    return { token, csrf, expiresAt };
  }

  /** The live session for this token, touching last_seen; undefined when unknown, idle or expired. */
  lookup(token: string): SessionRow | undefined {
    const h = sha256Hex(token);
    const r = this.db.prepare('SELECT * FROM auth_sessions WHERE token_hash = ?').get(h) as SessionRow | undefined;
    if (!r) return undefined;
    const t = this.now();
    if (t >= r.expires_at || t - r.last_seen_at >= this.times.idleMs) {
      this.db.prepare('DELETE FROM auth_sessions WHERE token_hash = ?').run(h);
      return undefined;
    }
    if (t - r.last_seen_at > 30_000) {
      this.db.prepare('UPDATE auth_sessions SET last_seen_at = ? WHERE token_hash = ?').run(t, h);
      r.last_seen_at = t;
    }
    return r;
  }

  /** Whether the session is still live, without counting this as activity. */
  isLive(token: string): boolean {
    const r = this.db.prepare('SELECT last_seen_at, expires_at FROM auth_sessions WHERE token_hash = ?').get(sha256Hex(token)) as
      | { last_seen_at: number; expires_at: number }
      | undefined;
    if (!r) return false;
    const t = this.now();
    return t < r.expires_at && t - r.last_seen_at < this.times.idleMs;
  }

  delete(token: string): void {
    this.db.prepare('DELETE FROM auth_sessions WHERE token_hash = ?').run(sha256Hex(token));
  }

  /** End every session of a user (password change, role change, disable), except `keepToken`'s. */
  deleteForUser(userId: number, keepToken?: string): number {
    if (keepToken)
      return this.db.prepare('DELETE FROM auth_sessions WHERE user_id = ? AND token_hash <> ?').run(userId, sha256Hex(keepToken)).changes;
    return this.db.prepare('DELETE FROM auth_sessions WHERE user_id = ?').run(userId).changes;
  }

  purgeExpired(): number {
    const t = this.now();
    return this.db.prepare('DELETE FROM auth_sessions WHERE expires_at <= ? OR last_seen_at <= ?').run(t, t - this.times.idleMs).changes;
  }
}
