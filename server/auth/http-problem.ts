/**
 * Answers of the auth and audit routers (RFC 9457 problem details, the same shape as core/api
 * Problem): the error they throw is the server's one HttpProblem; this adds their own body limit's
 * wording and the validation helper.
 */
import type { Response } from 'express';
import { HttpProblem } from '../api/problem.ts';

export { HttpProblem };

export interface ProblemBody {
  type: string;
  title: string;
  status: number;
  detail?: string;
  errors?: { path: string; message: string }[];
}

export function sendProblem(res: Response, status: number, kind: string, title: string, detail?: string, extra?: Partial<ProblemBody>): void {
  const body: ProblemBody = { type: `/problems/${kind}`, title, status, ...(detail ? { detail } : {}), ...extra };
  res.status(status).type('application/problem+json').send(JSON.stringify(body));
}

/** Answer with the problem an HttpProblem (server/api/problem.ts) describes. */
export function sendHttpProblem(res: Response, e: HttpProblem): void {
  if (e.retryAfterS !== undefined) res.setHeader('Retry-After', String(e.retryAfterS));
  sendProblem(res, e.status, e.kind, e.title, e.message, e.errors ? { errors: e.errors } : undefined);
}

/** zod-style issues → a 400 HttpProblem naming each offending field. */
export function validationError(what: string, issues: { path: PropertyKey[]; message: string }[]): HttpProblem {
  const errors = issues.map((i) => ({ path: i.path.map(String).join('.') || '(body)', message: i.message }));
  return new HttpProblem(400, 'Invalid request', `${what}: ` + errors.map((e) => `${e.path}: ${e.message}`).join('; '), 'validation', errors);
}

/**
 * Error handler for a router: body-parser errors (too large, malformed JSON) and HttpProblems
 * become problem details naming the problem; anything else is a 500 without internals.
 */
export function problemErrorHandler(limitText: string) {
  return (err: unknown, _req: import('express').Request, res: Response, next: import('express').NextFunction): void => {
    if (res.headersSent) return next(err);
    if (err instanceof HttpProblem) return sendHttpProblem(res, err);
    const e = err as { type?: string; status?: number; message?: string };
    if (e && e.type === 'entity.too.large')
      return sendProblem(res, 413, 'payload-too-large', 'Request body too large', `the request body is larger than ${limitText}`);
    if (e && e.type === 'entity.parse.failed')
      return sendProblem(res, 400, 'malformed-json', 'Malformed JSON', `the request body is not valid JSON: ${e.message ?? ''}`);
    if (e && typeof e.status === 'number' && e.status >= 400 && e.status < 500)
      return sendProblem(res, e.status, 'bad-request', 'Bad request', e.message ?? 'bad request');
    sendProblem(res, 500, 'internal', 'Internal error', 'the server could not complete the request; see the server log');
    console.error(err);
  };
}
