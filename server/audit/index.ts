/**
 * Audit trail. `install(ctx)` sets ctx.audit (and ctx.auth) and mounts /api/audit/*.
 * Idempotent: server/auth's install calls it too.
 */
import { ensureSecurity, type SecurityHost } from '../auth/security-setup.ts';
import { auditRouter, auditRoutes } from './audit-routes.ts';

const installed = new WeakSet<object>();

export function install(ctx: SecurityHost): void {
  const { audit, auth } = ensureSecurity(ctx);
  if (installed.has(ctx)) return;
  installed.add(ctx);
  const now = ctx.now ? () => ctx.now!() : Date.now;
  const table = auditRoutes(audit, now);
  ctx.api.use('/audit', auditRouter(audit, auth, now, table));
  ctx.routes?.include('/audit', table);
}

export { ChainedAuditTrail } from './audit-trail.ts';
export * from './types.ts';
