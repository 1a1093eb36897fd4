/**
 * Access control: users and roles, login with throttling, sessions with CSRF tokens, analyzer
 * tokens, electronic signatures. Every change is written to the audit trail.
 */
import { textProblem } from '../../core/io/names.ts';
import type { IncomingMessage } from 'node:http';
import type { NextFunction, Request, RequestHandler, Response } from 'express';
import { timingSafeEqual } from 'node:crypto';
import type { AuditTrail } from '../audit/types.ts';
import type { AuthRepositories, SignatureRepository, UnitOfWork, UnitOfWorkRunner, UserRepository } from '../storage/repositories.ts';
import { AnalyzerTokenStore } from './analyzer-tokens.ts';
import { readCookie } from './cookies.ts';
import { HttpProblem } from '../api/problem.ts';
import { sendHttpProblem } from './http-problem.ts';
import { DEFAULT_THROTTLE, LoginThrottle, addressKey, userKey, type ThrottlePolicy } from './login-throttle.ts';
import { DEFAULT_SCRYPT_LOG2N, hashPassword, needsRehash, passwordProblem, verifyPassword } from './password.ts';
import { DEFAULT_SESSION_TIMES, SessionStore, type SessionTimes } from './session-store.ts';
import {
  CSRF_COOKIE,
  CSRF_HEADER,
  SESSION_COOKIE,
  SIGNATURE_MEANINGS,
  SignatureError,
  isRole,
  roleAtLeast,
  type AnalyzerTokenInfo,
  type Auth,
  type AuthUser,
  type Role,
  type SignatureRecord,
  type SignatureRequest,
} from './types.ts';
import { USER_NAME_RE, toAuthUser, toUserView, type UserRow, type UserView } from './user-store.ts';

export interface AuthOptions {
  now?: () => number;
  /** log2 of the scrypt cost N for new hashes (default 17). */
  scryptLog2N?: number;
  session?: Partial<SessionTimes>;
  throttle?: Partial<ThrottlePolicy>;
  /** Mark cookies Secure (set when TLS is configured). */
  secureCookies?: boolean;
}

const UNSAFE = new Set(['POST', 'PUT', 'PATCH', 'DELETE']);

export interface LoginResult {
  user: AuthUser;
  token: string;
  csrfToken: string;
  expiresAt: number;
  mustChangePassword: boolean;
}

export interface SessionInfo {
  user: AuthUser;
  csrfToken: string;
  expiresAt: number;
  mustChangePassword: boolean;
}

function sameSecret(a: string, b: string): boolean {
  const x = Buffer.from(a);
  const y = Buffer.from(b);
  return x.length === y.length && timingSafeEqual(x, y);
}

function clip(s: string, n = 64): string {
  return s.length > n ? s.slice(0, n) + '…' : s;
}

/** What access control needs of the storage (SQLite: SqliteStorage). */
export interface AuthStorage extends UnitOfWorkRunner, AuthRepositories {
  readonly signatures: SignatureRepository;
}

export class AuthService implements Auth {
  readonly users: UserRepository;
  readonly sessions: SessionStore;
  readonly throttle: LoginThrottle;
  readonly tokens: AnalyzerTokenStore;
  readonly now: () => number;
  readonly scryptLog2N: number;
  readonly secureCookies: boolean;
  private dummyHash: Promise<string> | null = null;

  constructor(
    private readonly storage: AuthStorage,
    readonly audit: AuditTrail,
    opts: AuthOptions = {},
  ) {
    this.now = opts.now ?? Date.now;
    this.scryptLog2N = opts.scryptLog2N ?? DEFAULT_SCRYPT_LOG2N;
    this.secureCookies = opts.secureCookies ?? false;
    this.users = storage.users;
    this.sessions = new SessionStore(storage.sessions, { ...DEFAULT_SESSION_TIMES, ...opts.session }, this.now);
    this.throttle = new LoginThrottle(storage.loginFailures, { ...DEFAULT_THROTTLE, ...opts.throttle }, this.now);
    this.tokens = new AnalyzerTokenStore(storage.analyzerTokens, this.now);
  }

  private iso(): string {
    return new Date(this.now()).toISOString();
  }

  // ---- users ------------------------------------------------------------------------------------

  async createUser(
    u: { name: string; fullName?: string; role: Role; password: string; mustChangePassword?: boolean },
    by: string,
  ): Promise<UserView> {
    if (typeof u.name !== 'string' || !USER_NAME_RE.test(u.name))
      throw new HttpProblem(400, 'Bad user', 'user name must be 2–64 characters of A-Z a-z 0-9 . _ - starting with a letter or digit', 'bad-user');
    if (!isRole(u.role)) throw new HttpProblem(400, 'Bad user', `role must be one of viewer, operator, model-owner, administrator (got ${String(u.role)})`, 'bad-user');
    const pp = passwordProblem(u.password);
    if (pp) throw new HttpProblem(400, 'Password not accepted', pp, 'bad-password');
    const fullName = (u.fullName ?? u.name).trim() || u.name;
    const fp = textProblem(fullName);
    if (fp) throw new HttpProblem(400, 'Bad user', `full name ${fp}`, 'bad-user');
    if (await this.users.byName(u.name)) throw new HttpProblem(409, 'User exists', `a user named ${u.name} already exists`, 'user-exists');
    const hash = await hashPassword(u.password, this.scryptLog2N);
    const at = this.iso();
    const row = await this.storage.unitOfWork(async (uow) => {
      const r = await uow.users.insert({ name: u.name, fullName, role: u.role, passwordHash: hash, mustChange: !!u.mustChangePassword, createdBy: by, at });
      await this.audit.record({ user: by, action: 'user.create', object: `user:${r.name}`, after: { name: r.name, fullName, role: u.role } }, uow);
      return r;
    });
    return toUserView(row);
  }

  async listUsers(): Promise<UserView[]> {
    return (await this.users.list()).map(toUserView);
  }

  /** Administrator changes to another user: role, full name, disabled, password reset. */
  async updateUser(
    name: string,
    change: { role?: Role; fullName?: string; disabled?: boolean; password?: string; mustChangePassword?: boolean },
    by: AuthUser | string,
    reason?: string,
  ): Promise<UserView> {
    const byName = typeof by === 'string' ? by : by.name;
    const row = await this.users.byName(name);
    if (!row) throw new HttpProblem(404, 'No such user', `no user named ${name}`, 'no-such-user');
    if (change.role !== undefined && !isRole(change.role)) throw new HttpProblem(400, 'Bad user', `unknown role ${String(change.role)}`, 'bad-user');
    if (change.fullName !== undefined && change.fullName.trim() !== '') {
      const fp = textProblem(change.fullName);
      if (fp) throw new HttpProblem(400, 'Bad user', `full name ${fp}`, 'bad-user');
    }
    if (change.password !== undefined) {
      const pp = passwordProblem(change.password);
      if (pp) throw new HttpProblem(400, 'Password not accepted', pp, 'bad-password');
    }
    const losesAdmin =
      row.role === 'administrator' && !row.disabled_at && ((change.role && change.role !== 'administrator') || change.disabled === true);
    if (losesAdmin && (await this.users.activeAdministrators()) <= 1)
      throw new HttpProblem(409, 'Last administrator', 'this is the last active administrator: create another one first', 'last-administrator');
    const hash = change.password !== undefined ? await hashPassword(change.password, this.scryptLog2N) : null;
    const at = this.iso();
    const after = await this.storage.unitOfWork(async (uow) => {
      const before = { role: row.role, fullName: row.full_name, disabled: row.disabled_at !== null };
      if (change.role !== undefined) await uow.users.setRole(row.id, change.role);
      if (change.fullName !== undefined) await uow.users.setFullName(row.id, change.fullName.trim() || row.name);
      if (change.disabled !== undefined) await uow.users.setDisabled(row.id, change.disabled ? (row.disabled_at ?? at) : null);
      if (hash) await uow.users.setPassword(row.id, hash, change.mustChangePassword ?? true, at);
      const r = (await uow.users.byId(row.id))!;
      const afterState = { role: r.role, fullName: r.full_name, disabled: r.disabled_at !== null, ...(hash ? { passwordReset: true } : {}) };
      // Role change, disabling and password reset end the user's sessions.
      if (change.role !== undefined || change.disabled || hash) await this.sessions.deleteForUser(row.id, undefined, uow.sessions);
      await this.audit.record({ user: byName, action: 'user.update', object: `user:${r.name}`, before, after: afterState, reason: reason ?? null }, uow);
      return r;
    });
    return toUserView(after);
  }

  async changeOwnPassword(user: AuthUser, current: string, next: string, keepToken: string | undefined, address: string): Promise<void> {
    const row = await this.users.byId(user.id);
    if (!row) throw new HttpProblem(401, 'Login required', 'user no longer exists', 'login-required');
    await this.checkThrottle(row.name, address);
    if (!(await verifyPassword(String(current ?? ''), row.password_hash))) {
      await this.recordFailure(row.name, address, 'password.change', 'current password wrong');
      throw new HttpProblem(401, 'Wrong password', 'the current password is wrong', 'wrong-password');
    }
    const pp = passwordProblem(next);
    if (pp) throw new HttpProblem(400, 'Password not accepted', pp, 'bad-password');
    if (current === next) throw new HttpProblem(400, 'Password not accepted', 'the new password must differ from the current one', 'bad-password');
    const hash = await hashPassword(next, this.scryptLog2N);
    await this.storage.unitOfWork(async (uow) => {
      await uow.users.setPassword(row.id, hash, false, this.iso());
      await this.sessions.deleteForUser(row.id, keepToken, uow.sessions);
      await this.audit.record({ user: row.name, action: 'user.password-change', object: `user:${row.name}` }, uow);
    });
  }

  // ---- login ------------------------------------------------------------------------------------

  private async checkThrottle(name: string, address: string): Promise<void> {
    const c = await this.throttle.check([userKey(name), addressKey(address)]);
    if (c.waitMs > 0) {
      const s = Math.ceil(c.waitMs / 1000);
      const what = c.key?.startsWith('addr:') ? 'from this address' : 'for this user';
      throw new HttpProblem(429, 'Too many failed attempts', `too many failed attempts ${what}: try again in ${s} s`, 'too-many-attempts', undefined, s);
    }
  }

  /** Count a failure, audit it, and audit a lock when one engages. */
  private async recordFailure(name: string, address: string, action: string, why: string): Promise<void> {
    const states = await this.throttle.fail([userKey(name), addressKey(address)]);
    await this.audit.record({ user: 'anonymous', action: `${action}.failed`, object: `user:${clip(name)}`, after: { address }, reason: why });
    for (const s of states) {
      if (s.lockedUntil > 0)
        await this.audit.record({
          user: SYSTEM_USER,
          action: 'auth.throttle',
          object: s.key.startsWith('addr:') ? `address:${clip(s.key.slice(5))}` : `user:${clip(s.key.slice(5))}`,
          after: { failures: s.failures, lockedUntil: new Date(s.lockedUntil).toISOString() },
          reason: 'repeated failed attempts',
        });
    }
  }

  private async dummy(): Promise<string> {
    this.dummyHash ??= hashPassword('tideline-dummy-password', this.scryptLog2N);
    return this.dummyHash;
  }

  async login(name: unknown, password: unknown, address: string): Promise<LoginResult> {
    if (typeof name !== 'string' || name.length === 0 || name.length > 64)
      throw new HttpProblem(400, 'Bad request', 'name must be a non-empty string of at most 64 characters', 'bad-request');
    if (typeof password !== 'string' || password.length === 0 || password.length > 256)
      throw new HttpProblem(400, 'Bad request', 'password must be a non-empty string of at most 256 characters', 'bad-request');
    await this.checkThrottle(name, address);
    const row = await this.users.byName(name);
    const ok = row ? await verifyPassword(password, row.password_hash) : (await verifyPassword(password, await this.dummy()), false);
    if (!row || !ok) {
      await this.recordFailure(name, address, 'auth.login', row ? 'wrong password' : 'unknown user');
      throw new HttpProblem(401, 'Login failed', 'user name or password is wrong', 'login-failed');
    }
    if (row.disabled_at) {
      await this.audit.record({ user: row.name, action: 'auth.login.failed', object: `user:${row.name}`, after: { address }, reason: 'account disabled' });
      throw new HttpProblem(403, 'Account disabled', 'this account is disabled; ask an administrator', 'account-disabled');
    }
    await this.throttle.clear(userKey(name));
    if (needsRehash(row.password_hash, this.scryptLog2N)) await this.users.replaceHash(row.id, await hashPassword(password, this.scryptLog2N));
    const s = await this.sessions.create(row.id, address);
    await this.audit.record({ user: row.name, action: 'auth.login', object: `user:${row.name}`, after: { address } });
    return { user: toAuthUser(row), token: s.token, csrfToken: s.csrf, expiresAt: s.expiresAt, mustChangePassword: row.must_change_password === 1 };
  }

  async logout(token: string, user: AuthUser): Promise<void> {
    await this.sessions.delete(token);
    await this.audit.record({ user: user.name, action: 'auth.logout', object: `user:${user.name}` });
  }

  // ---- sessions and middleware ----------------------------------------------------------------

  /** The session behind a Cookie header, or null. */
  async session(cookieHeader: string | undefined): Promise<(SessionInfo & { token: string }) | null> {
    const token = readCookie(cookieHeader, SESSION_COOKIE);
    if (!token || token.length > 100) return null;
    const s = await this.sessions.lookup(token);
    if (!s) return null;
    const row: UserRow | null = await this.users.byId(s.user_id);
    if (!row || row.disabled_at) return null;
    return { token, user: toAuthUser(row), csrfToken: s.csrf_token, expiresAt: s.expires_at, mustChangePassword: row.must_change_password === 1 };
  }

  async userFromRequest(req: IncomingMessage): Promise<AuthUser | null> {
    return (await this.session(req.headers.cookie))?.user ?? null;
  }

  /**
   * For a WebSocket opened with a session (/live): close it with code 4401 once the session ends
   * (logout, expiry, role change, disabled user, password reset). Checks every `everyMs`; the
   * check does not count as activity, so an open dashboard does not keep an idle session alive.
   */
  async closeWhenSessionEnds(req: IncomingMessage, ws: { close(code?: number, reason?: string): void; once(ev: 'close', fn: () => void): unknown }, everyMs = 30_000): Promise<void> {
    const token = readCookie(req.headers.cookie, SESSION_COOKIE);
    const userId = token ? (await this.sessions.lookup(token))?.user_id : undefined;
    if (!token || userId === undefined) {
      ws.close(4401, 'session ended: log in again');
      return;
    }
    let ended = false;
    const check = async () => {
      const row = await this.users.byId(userId);
      if (!ended && (!(await this.sessions.isLive(token)) || !row || row.disabled_at)) {
        ended = true;
        clearInterval(timer);
        ws.close(4401, 'session ended: log in again');
      }
    };
    const timer = setInterval(() => void check().catch(() => undefined), everyMs);
    timer.unref();
    ws.once('close', () => {
      ended = true;
      clearInterval(timer);
    });
  }

  identify(): RequestHandler {
    return (req: Request, _res: Response, next: NextFunction) => {
      this.session(req.headers.cookie).then((s) => {
        if (s) req.user = s.user;
        next();
      }, next);
    };
  }

  requireRole(role: Role): RequestHandler {
    if (!isRole(role)) throw new Error(`requireRole: unknown role ${String(role)}`);
    return (req: Request, res: Response, next: NextFunction) => void this.session(req.headers.cookie).then((s) => {
      if (!s) return sendHttpProblem(res, new HttpProblem(401, 'Login required', 'no valid session: log in with POST /api/auth/login', 'login-required'));
      if (!roleAtLeast(s.user.role, role))
        return sendHttpProblem(
          res,
          new HttpProblem(403, 'Forbidden', `this needs the role ${role} or above; ${s.user.name} has the role ${s.user.role}`, 'forbidden'),
        );
      if (UNSAFE.has(req.method)) {
        const h = req.get(CSRF_HEADER);
        if (!h || !sameSecret(h, s.csrfToken))
          return sendHttpProblem(
            res,
            new HttpProblem(403, 'CSRF token missing or wrong', `send the header ${CSRF_HEADER} with the csrfToken from login or GET /api/auth/me`, 'csrf'),
          );
      }
      req.user = s.user;
      next();
    }, next);
  }

  /** Set the session and CSRF cookies after login. */
  setSessionCookies(res: Response, r: { token: string; csrfToken: string; expiresAt: number }): void {
    const maxAge = Math.max(0, r.expiresAt - this.now());
    res.cookie(SESSION_COOKIE, r.token, { httpOnly: true, sameSite: 'strict', secure: this.secureCookies, path: '/', maxAge });
    // Readable by the page's script, which echoes it in the x-csrf-token header.
    res.cookie(CSRF_COOKIE, r.csrfToken, { httpOnly: false, sameSite: 'strict', secure: this.secureCookies, path: '/', maxAge });
  }

  clearSessionCookies(res: Response): void {
    res.clearCookie(SESSION_COOKIE, { httpOnly: true, sameSite: 'strict', secure: this.secureCookies, path: '/' });
    res.clearCookie(CSRF_COOKIE, { sameSite: 'strict', secure: this.secureCookies, path: '/' });
  }

  // ---- analyzer tokens --------------------------------------------------------------------------

  verifyAnalyzerToken(token: string): Promise<string | null> {
    return this.tokens.verify(token);
  }

  createAnalyzerToken(analyzer: string, label: string, createdBy: string): Promise<{ id: string; token: string }> {
    const lp = label === '' ? null : textProblem(label);
    if (lp) return Promise.reject(new HttpProblem(400, 'Bad token request', `label ${lp}`, 'bad-token'));
    return this.storage.unitOfWork(async (uow) => {
      const t = await this.tokens.create(analyzer, label, createdBy, uow.analyzerTokens);
      await this.audit.record({ user: createdBy, action: 'analyzer-token.create', object: `analyzer:${analyzer}`, after: { tokenId: t.id, label } }, uow);
      return { id: t.id, token: t.token };
    });
  }

  listAnalyzerTokens(): Promise<AnalyzerTokenInfo[]> {
    return this.tokens.list();
  }

  private readonly revokeListeners: ((analyzer: string) => Promise<void> | void)[] = [];

  onAnalyzerTokenRevoked(listener: (analyzer: string) => Promise<void> | void): void {
    this.revokeListeners.push(listener);
  }

  async revokeAnalyzerToken(id: string, revokedBy: string): Promise<boolean> {
    const analyzer = await this.storage.unitOfWork(async (uow) => {
      const info = await this.tokens.get(id, uow.analyzerTokens);
      if (!info || !(await this.tokens.revoke(id, revokedBy, uow.analyzerTokens))) return null;
      await this.audit.record({ user: revokedBy, action: 'analyzer-token.revoke', object: `analyzer:${info.analyzer}`, before: { tokenId: id, revoked: false }, after: { tokenId: id, revoked: true } }, uow);
      return info.analyzer;
    });
    if (analyzer === null) return false;
    // After the commit: the token no longer verifies, so open connections that used it are closed now.
    for (const l of this.revokeListeners) {
      try {
        await l(analyzer);
      } catch (e) {
        console.error(`acting on the revocation of a token of analyzer ${analyzer} failed: ${(e as Error)?.message ?? String(e)}`);
      }
    }
    return true;
  }

  // ---- electronic signatures ----------------------------------------------------------------

  async sign<T = void>(req: SignatureRequest, apply?: (sig: SignatureRecord, uow: UnitOfWork) => Promise<T>): Promise<{ signature: SignatureRecord; result: T }> {
    const object = `${req.objectType}:${req.objectId}`;
    if (!(SIGNATURE_MEANINGS as readonly string[]).includes(req.meaning)) throw new SignatureError(`unknown signature meaning ${String(req.meaning)}`, 400);
    if (typeof req.reason !== 'string' || req.reason.trim().length === 0) throw new SignatureError('a signature needs a reason', 400);
    if (req.reason.length > 2000) throw new SignatureError('reason longer than 2000 characters', 400);
    if (req.override !== undefined && (typeof req.override !== 'string' || req.override.trim().length === 0 || req.override.length > 2000)) throw new SignatureError('an override needs its reason (1 to 2000 characters)', 400);
    if (typeof req.objectHash !== 'string' || !/^[0-9a-f]{64}$/i.test(req.objectHash))
      throw new SignatureError('the signed object needs its SHA-256 (64 hex digits)', 400);
    if (typeof req.password !== 'string' || req.password.length === 0)
      throw new SignatureError('re-enter your password to sign', 400);
    const address = req.address ?? 'unknown';
    const row = await this.users.byId(req.user.id);
    if (!row || row.disabled_at) throw new SignatureError('the signing user does not exist or is disabled', 403);
    try {
      await this.checkThrottle(row.name, address);
    } catch (e) {
      if (e instanceof HttpProblem) throw new SignatureError(e.message, 429);
      throw e;
    }
    if (!(await verifyPassword(req.password, row.password_hash))) {
      await this.throttle.fail([userKey(row.name), addressKey(address)]);
      await this.audit.record({
        user: row.name,
        action: 'signature.failed',
        object,
        after: { meaning: req.meaning, objectHash: req.objectHash },
        reason: 'wrong password',
      });
      throw new SignatureError('password does not match: signature refused (this attempt is in the audit trail)', 401);
    }
    await this.throttle.clear(userKey(row.name));
    const user = toAuthUser(row);
    return this.storage.unitOfWork(async (uow) => {
      const rec = await this.audit.record({
        user: user.name,
        action: `signature.${req.meaning}`,
        object,
        after: { meaning: req.meaning, objectHash: req.objectHash, signer: user.fullName, role: user.role, ...(req.override !== undefined ? { override: req.override } : {}), ...(req.evidence !== undefined ? { evidence: req.evidence } : {}) },
        reason: req.reason,
      }, uow);
      const signature = await uow.signatures.insert({
        userId: user.id,
        userName: user.name,
        fullName: user.fullName,
        role: user.role,
        meaning: req.meaning,
        objectType: req.objectType,
        objectId: req.objectId,
        objectHash: req.objectHash,
        reason: req.reason,
        override: req.override ?? null,
        signedAt: rec.at,
        auditSeq: rec.seq,
      });
      const result = apply ? await apply(signature, uow) : (undefined as T);
      return { signature, result };
    });
  }

  signaturesFor(objectType: string, objectId: string): Promise<SignatureRecord[]> {
    return this.storage.signatures.forObject(objectType, objectId);
  }
}

export const SYSTEM_USER = 'system';
