/**
 * /api/audit/* — the Ledger's data.
 *
 * | method | path                 | role   | returns |
 * | ------ | -------------------- | ------ | ------- |
 * | GET    | /api/audit?from=&to=&user=&action=&object=&afterSeq=&limit=&order=asc|desc | viewer | {items, total, limit} |
 * | GET    | /api/audit/verify    | viewer | AuditVerifyResult (200 either way; `ok` says) |
 * | GET    | /api/audit/export?format=csv|json&(filters) | viewer | file download |
 *
 * `action` ending in '.' and `object` ending in ':' are prefixes (action=model. → all model actions).
 */
import express, { type Router } from 'express';
import { z } from 'zod';
import type { Auth } from '../auth/types.ts';
import { RouteTable } from '../api/route-table.ts';
import { authValidate } from '../auth/auth-routes.ts';
import { HttpProblem } from '../api/problem.ts';
import { problemErrorHandler } from '../auth/http-problem.ts';
import { AuditInputError, MAX_LIST, formatAnchor, parseAnchors } from './audit-trail.ts';
import type { AuditFilter, AuditRecord, AuditTrail } from './types.ts';

/** Answer of GET /api/audit. */
export interface AuditPage {
  items: AuditRecord[];
  total: number;
  limit: number;
}

const filterQuery = z
  .object({
    from: z.string().max(40).optional(),
    to: z.string().max(40).optional(),
    user: z.string().max(200).optional(),
    action: z.string().max(200).optional(),
    object: z.string().max(500).optional(),
    afterSeq: z.coerce.number().int().min(0).optional(),
    limit: z.coerce.number().int().min(1).max(MAX_LIST).optional(),
    order: z.enum(['asc', 'desc']).optional(),
    format: z.enum(['csv', 'json']).optional(),
  })
  .strict();

function toFilter(q: z.infer<typeof filterQuery>): AuditFilter {
  return {
    from: q.from,
    to: q.to,
    user: q.user,
    action: q.action,
    object: q.object,
    afterSeq: q.afterSeq,
    limit: q.limit,
    descending: q.order === 'desc',
  };
}

async function guard<T>(fn: () => Promise<T>): Promise<T> {
  try {
    return await fn();
  } catch (e) {
    if (e instanceof AuditInputError) throw new HttpProblem(400, 'Invalid request', e.message, 'validation');
    throw e;
  }
}

/** The /api/audit routes as a table (paths relative to /api/audit). */
export function auditRoutes(trail: AuditTrail, now: () => number): RouteTable {
  const t = new RouteTable({ validate: authValidate });

  t.add({
    method: 'get', path: '/', summary: "The audit trail, filtered (the Ledger's data)", role: 'viewer', query: filterQuery, subject: 'audit query',
    response: 'AuditPage', responseSource: 'server/audit/audit-routes.ts',
    handler: async ({ query }): Promise<AuditPage> => {
      const f = toFilter(query);
      const items = await guard(() => trail.list(f));
      const total = await guard(() => trail.count({ ...f, afterSeq: undefined }));
      return { items, total, limit: f.limit ?? 200 };
    },
  });

  t.add({
    method: 'get', path: '/verify', summary: 'Check the hash chain of the whole trail, and against anchors kept outside (anchor=SEQ:HASH, repeatable; 200 either way; ok says)', role: 'viewer',
    query: z.object({ anchor: z.union([z.string().max(200), z.array(z.string().max(200)).max(100)]).optional() }),
    response: 'AuditVerifyResult', responseSource: 'server/audit/types.ts',
    handler: async ({ query }) => {
      const given = query.anchor === undefined ? [] : Array.isArray(query.anchor) ? query.anchor : [query.anchor];
      const anchors = await guard(async () => given.flatMap((a) => parseAnchors(a, 'anchor')));
      const v = await trail.verify(anchors);
      const head = v.ok ? await trail.anchor() : null;
      return head ? { ...v, anchor: formatAnchor(head) } : v;
    },
  });

  t.add({
    method: 'get', path: '/export', summary: 'The filtered trail as a CSV or JSON file', role: 'viewer', query: filterQuery, subject: 'audit export',
    response: 'application/json, text/csv',
    handler: async ({ query, res }) => {
      const f = { ...toFilter(query), limit: undefined, descending: false };
      const stamp = new Date(now()).toISOString().replace(/[:.]/g, '-');
      if ((query.format ?? 'json') === 'csv') {
        const text = await guard(() => trail.exportCsv(f));
        res.setHeader('Content-Disposition', `attachment; filename="tideline-audit-${stamp}.csv"`);
        res.type('text/csv; charset=utf-8').send(text);
      } else {
        const text = await guard(() => trail.exportJson(f));
        res.setHeader('Content-Disposition', `attachment; filename="tideline-audit-${stamp}.json"`);
        res.type('application/json; charset=utf-8').send(text);
      }
      return undefined;
    },
  });

  return t;
}

export function auditRouter(trail: AuditTrail, auth: Auth, now: () => number, table: RouteTable = auditRoutes(trail, now)): Router {
  const r = express.Router();
  table.mount(r, (role) => auth.requireRole(role));
  r.use(problemErrorHandler('16 KiB'));
  return r;
}
