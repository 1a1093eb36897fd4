/**
 * Creates the audit trail and the auth service for a server (once per server context), from the
 * storage (its repositories and units of work) and the `auth`/`tls` parts of the configuration.
 */
import type { RequestHandler, Router } from 'express';
import type { RouteTable } from '../api/route-table.ts';
import { ChainedAuditTrail } from '../audit/audit-trail.ts';
import type { AuditTrail } from '../audit/types.ts';
import type { AuditRepository } from '../storage/repositories.ts';
import { AuthService, type AuthStorage } from './auth-service.ts';
import { readSecurityConfig } from './security-config.ts';
import type { Auth } from './types.ts';

/** The part of the server context (server/context.ts) that auth and audit use. */
export interface SecurityHost {
  storage: SecurityStorage;
  /** Router mounted at /api. */
  api: Router;
  /** The server's route table (server/api/route-table.ts): the auth and audit tables are included for the OpenAPI document. */
  routes?: RouteTable;
  /** The whole app, for response headers on every answer (optional). */
  app?: { use(fn: RequestHandler): unknown };
  config?: unknown;
  audit?: AuditTrail;
  auth?: Auth;
  now?(): number;
  onClose?(fn: () => void | Promise<void>): void;
}

/** What auth and audit need of the storage (SQLite: SqliteStorage). */
export interface SecurityStorage extends AuthStorage {
  readonly audit: AuditRepository;
}

export function createSecurity(storage: SecurityStorage, config: unknown, now: () => number = Date.now): { audit: ChainedAuditTrail; auth: AuthService } {
  const { auth: ac, tls } = readSecurityConfig(config);
  // An empty trail beside stored users was deleted (every user's creation is audited).
  const audit = new ChainedAuditTrail(storage, { now, countUsers: async () => auth.users.count() });
  const auth: AuthService = new AuthService(storage, audit, {
    now,
    scryptLog2N: ac.scryptLog2N,
    secureCookies: tls !== null,
    session: { idleMs: ac.sessionIdleMinutes * 60_000, maxMs: ac.sessionMaxHours * 3_600_000 },
    throttle: {
      userFreeFailures: ac.userFreeFailures,
      addressFreeFailures: ac.addressFreeFailures,
      baseDelayMs: ac.lockBaseMs,
      maxDelayMs: ac.lockMaxMs,
    },
  });
  return { audit, auth };
}

const purging = new WeakSet<AuthService>();

/** ctx.audit and ctx.auth, created on first use and set on the context; expired sessions purged while it runs. */
export function ensureSecurity(host: SecurityHost): { audit: ChainedAuditTrail; auth: AuthService } {
  let audit = host.audit instanceof ChainedAuditTrail ? host.audit : null;
  let auth = host.auth instanceof AuthService ? host.auth : null;
  if (!audit || !auth) {
    const now = host.now ? () => host.now!() : Date.now;
    const made = createSecurity(host.storage, host.config, now);
    audit ??= made.audit;
    auth ??= made.auth;
  }
  host.audit = audit;
  host.auth = auth;
  if (!purging.has(auth)) {
    purging.add(auth);
    // Expired sessions are refused on lookup anyway; this keeps the table small.
    const a = auth;
    const timer = setInterval(() => void a.sessions.purgeExpired().catch(() => undefined), 10 * 60_000);
    timer.unref();
    host.onClose?.(() => clearInterval(timer));
  }
  return { audit, auth };
}
