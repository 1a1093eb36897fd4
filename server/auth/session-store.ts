/**
 * Login sessions (table auth_sessions). The browser holds a random 256-bit token in an
 * HTTP-only cookie; the table holds only its SHA-256, so a copy of the database does not give
 * anyone a live session. Each session has its own CSRF token (sent back in x-csrf-token).
 */
import { createHash, randomBytes } from 'node:crypto';
import type { SessionRepository, SessionRow } from '../storage/repositories.ts';

export type { SessionRow };

export function sha256Hex(s: string): string {
  return createHash('sha256').update(s, 'utf8').digest('hex');
}

export function randomToken(bytes = 32): string {
  return randomBytes(bytes).toString('base64url');
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
    private readonly repo: SessionRepository,
    readonly times: SessionTimes,
    private readonly now: () => number,
  ) {}

  async create(userId: number, address: string | null): Promise<{ token: string; csrf: string; expiresAt: number }> {
    const token = randomToken();
    const csrf = randomToken();
    const t = this.now();
    const expiresAt = t + this.times.maxMs;
    await this.repo.insert({ token_hash: sha256Hex(token), user_id: userId, csrf_token: csrf, created_at: t, last_seen_at: t, expires_at: expiresAt, address });
    return { token, csrf, expiresAt };
  }

  /** The live session for this token, touching last_seen; undefined when unknown, idle or expired. */
  async lookup(token: string): Promise<SessionRow | undefined> {
    const h = sha256Hex(token);
    const r = await this.repo.get(h);
    if (!r) return undefined;
    const t = this.now();
    if (t >= r.expires_at || t - r.last_seen_at >= this.times.idleMs) {
      await this.repo.delete(h);
      return undefined;
    }
    if (t - r.last_seen_at > 30_000) {
      await this.repo.touch(h, t);
      r.last_seen_at = t;
    }
    return r;
  }

  /** Whether the session is still live, without counting this as activity. */
  async isLive(token: string): Promise<boolean> {
    const r = await this.repo.get(sha256Hex(token));
    if (!r) return false;
    const t = this.now();
    return t < r.expires_at && t - r.last_seen_at < this.times.idleMs;
  }

  async delete(token: string): Promise<void> {
    await this.repo.delete(sha256Hex(token));
  }

  /** End every session of a user (password change, role change, disable), except `keepToken`'s; through `repo` (a unit of work's) when given. */
  deleteForUser(userId: number, keepToken?: string, repo: SessionRepository = this.repo): Promise<number> {
    return repo.deleteForUser(userId, keepToken ? sha256Hex(keepToken) : undefined);
  }

  purgeExpired(): Promise<number> {
    const t = this.now();
    return this.repo.purge(t, t - this.times.idleMs);
  }
}
