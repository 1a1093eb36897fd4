/** RFC 9457 problem details for every error answer of the REST API. */
import type { ErrorRequestHandler, Request } from 'express';
import { z } from 'zod';
import type { Problem } from '../../core/api/rest.ts';
import type { Logger } from '../logger.ts';

/** The one error that knows its HTTP answer (RFC 9457 problem details), for every route of the server. */
export class HttpProblem extends Error {
  constructor(
    readonly status: number,
    readonly title: string,
    readonly detail: string,
    /** The problem type's last segment: `/problems/<kind>`. */
    readonly kind = slug(title),
    /** The offending fields, each with what is wrong with it. */
    readonly errors?: { path: string; message: string }[],
    /** Seconds to wait before trying again (sent as Retry-After), e.g. for 429. */
    readonly retryAfterS?: number,
  ) {
    super(detail);
    this.name = 'HttpProblem';
  }
}

/**
 * A refused request as the one problem class: the title (and with it the problem type) follows the
 * status when not given — 404 Not found, 409 Conflict, otherwise Cannot process.
 */
export function requestProblem(status: number, detail: string, title?: string, kind?: string): HttpProblem {
  return new HttpProblem(status, title ?? (status === 404 ? 'Not found' : status === 409 ? 'Conflict' : 'Cannot process'), detail, kind);
}

function slug(s: string) {
  return s.toLowerCase().replace(/[^a-z0-9]+/g, '-').replace(/^-|-$/g, '');
}

export const notFound = (what: string) => new HttpProblem(404, 'Not found', what, 'not-found');
export const conflict = (detail: string) => new HttpProblem(409, 'Conflict', detail, 'conflict');

/** Parse with zod; on failure throw a 400 problem listing each offending field. */
export function validate<T>(schema: z.ZodType<T>, data: unknown, where: 'query' | 'body' | 'path'): T {
  const r = schema.safeParse(data ?? {});
  if (r.success) return r.data;
  const errors = r.error.issues.map((i) => ({ path: [where, ...i.path.map(String)].join('.'), message: i.message }));
  throw new HttpProblem(400, 'Invalid request', `the request ${where} is invalid: ${errors.map((e) => `${e.path}: ${e.message}`).join('; ')}`, 'invalid-request', errors);
}

export function sendProblem(res: import('express').Response, req: Request, p: Problem) {
  res.status(p.status).type('application/problem+json').send(JSON.stringify({ ...p, instance: req.originalUrl }));
}

export function problemHandler(log: Logger): ErrorRequestHandler {
  return (err, req, res, _next) => {
    if (res.headersSent) {
      res.end();
      return;
    }
    if (err instanceof HttpProblem) {
      if (err.retryAfterS !== undefined) res.setHeader('Retry-After', String(err.retryAfterS));
      const p: Problem = { type: `/problems/${err.kind}`, title: err.title, status: err.status, detail: err.detail };
      if (err.errors) p.errors = err.errors;
      sendProblem(res, req, p);
      return;
    }
    const e = err as { type?: string; status?: number; message?: string; limit?: number };
    if (e?.type === 'entity.parse.failed') {
      sendProblem(res, req, { type: '/problems/invalid-json', title: 'Invalid JSON', status: 400, detail: `the request body is not valid JSON: ${e.message}` });
      return;
    }
    if (e?.type === 'entity.too.large') {
      // the limit of the parser that refused it (body-parser sets it in bytes): 1 MiB, or a route's own
      const limit = typeof e.limit === 'number' ? `${+(e.limit / 1048576).toFixed(2)} MiB` : '1 MiB';
      sendProblem(res, req, { type: '/problems/too-large', title: 'Request too large', status: 413, detail: `the request body is larger than the server accepts (${limit})` });
      return;
    }
    if (typeof e?.status === 'number' && e.status >= 400 && e.status < 500) {
      sendProblem(res, req, { type: '/problems/bad-request', title: 'Bad request', status: e.status, detail: e.message ?? 'bad request' });
      return;
    }
    log.error(`${req.method} ${req.originalUrl} failed`, err);
    sendProblem(res, req, { type: '/problems/internal', title: 'Internal error', status: 500, detail: `the server failed to answer: ${(err as Error)?.message ?? String(err)}` });
  };
}
