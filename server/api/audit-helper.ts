/** Audit records of the REST routes, through the server's audit trail (server/audit). */
import type { Request } from 'express';
import type { ServerContext } from '../context.ts';

export function userOf(req: Request): string {
  return req.user?.name ?? 'anonymous';
}

export async function recordAudit(
  ctx: ServerContext,
  e: { user: string; action: string; object: string; before?: unknown; after?: unknown; reason?: string | null },
): Promise<void> {
  await ctx.audit.record({ user: e.user, action: e.action, object: e.object, before: e.before, after: e.after, reason: e.reason ?? null });
}
