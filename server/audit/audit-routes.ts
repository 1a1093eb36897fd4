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
import { handle, parseWith } from '../auth/auth-routes.ts';
import { HttpError, problemErrorHandler } from '../auth/http-problem.ts';
import { AuditInputError, MAX_LIST, type SqliteAuditTrail } from './audit-trail.ts';
import type { AuditFilter } from './types.ts';

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

function guard<T>(fn: () => T): T {
  try {
    return fn();
  } catch (e) {
    if (e instanceof AuditInputError) throw new HttpError(400, 'validation', 'Invalid request', e.message);
    throw e;
  }
}

export function auditRouter(trail: SqliteAuditTrail, auth: Auth, now: () => number): Router {
  const r = express.Router();
  const viewer = auth.requireRole('viewer');

  r.get(
    '/',
    viewer,
    handle((req, res) => {
      const q = parseWith(filterQuery, req.query, 'audit query');
      const f = toFilter(q);
      const items = guard(() => trail.list(f));
      const total = guard(() => trail.count({ ...f, afterSeq: undefined }));
      res.json({ items, total, limit: f.limit ?? 200 });
    }),
  );

  r.get('/verify', viewer, handle((_req, res) => void res.json(trail.verify())));

  r.get(
    '/export',
    viewer,
    handle((req, res) => {
      const q = parseWith(filterQuery, req.query, 'audit export');
      const f = { ...toFilter(q), limit: undefined, descending: false };
      const stamp = new Date(now()).toISOString().replace(/[:.]/g, '-');
      if ((q.format ?? 'json') === 'csv') {
        const text = guard(() => trail.exportCsv(f));
        res.setHeader('Content-Disposition', `attachment; filename="tideline-audit-${stamp}.csv"`);
        res.type('text/csv; charset=utf-8').send(text);
      } else {
        const text = guard(() => trail.exportJson(f));
        res.setHeader('Content-Disposition', `attachment; filename="tideline-audit-${stamp}.json"`);
        res.type('application/json; charset=utf-8').send(text);
      }
    }),
  );

  r.use(problemErrorHandler('16 KiB'));
  return r;
}
