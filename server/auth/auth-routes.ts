/**
 * /api/auth/*: login, logout, me, password, users, analyzer tokens, signatures.
 *
 * | method | path                          | role          | body / returns |
 * | ------ | ----------------------------- | ------------- | -------------- |
 * | POST   | /api/auth/login               | —             | {name, password} → {user, csrfToken, expiresAt, mustChangePassword} + cookies |
 * | POST   | /api/auth/logout              | viewer        | → 204 |
 * | GET    | /api/auth/me                  | —             | → {user, csrfToken, expiresAt, mustChangePassword} or 401 |
 * | POST   | /api/auth/password            | viewer        | {currentPassword, newPassword} → 204 |
 * | GET    | /api/auth/users               | administrator | → {items: UserView[]} |
 * | POST   | /api/auth/users               | administrator | {name, fullName?, role, password, mustChangePassword?} → 201 UserView |
 * | PATCH  | /api/auth/users/:name         | administrator | {role?, fullName?, disabled?, password?, reason?} → UserView |
 * | GET    | /api/auth/tokens              | administrator | → {items: AnalyzerTokenInfo[]} |
 * | POST   | /api/auth/tokens              | administrator | {analyzer, label?} → 201 {id, analyzer, token} (token shown once) |
 * | DELETE | /api/auth/tokens/:id          | administrator | → 204, 404 when unknown or already revoked |
 * | GET    | /api/auth/signatures?objectType=&objectId= | viewer | → {items: SignatureRecord[]} |
 */
import express, { type Request, type Response, type Router } from 'express';
import { z } from 'zod';
import type { AuthService } from './auth-service.ts';
import { HttpError, problemErrorHandler, sendHttpError, validationError } from './http-problem.ts';
import { ROLES } from './types.ts';

export const AUTH_BODY_LIMIT = '16kb';

const loginBody = z.object({ name: z.string().min(1).max(64), password: z.string().min(1).max(256) }).strict();
const passwordBody = z.object({ currentPassword: z.string().min(1).max(256), newPassword: z.string().min(1).max(256) }).strict();
const createUserBody = z
  .object({
    name: z.string().min(1).max(64),
    fullName: z.string().max(200).optional(),
    role: z.enum(ROLES),
    password: z.string().min(1).max(256),
    mustChangePassword: z.boolean().optional(),
  })
  .strict();
const updateUserBody = z
  .object({
    role: z.enum(ROLES).optional(),
    fullName: z.string().max(200).optional(),
    disabled: z.boolean().optional(),
    password: z.string().min(1).max(256).optional(),
    mustChangePassword: z.boolean().optional(),
    reason: z.string().max(2000).optional(),
  })
  .strict();
const tokenBody = z.object({ analyzer: z.string().min(1).max(64), label: z.string().max(200).optional() }).strict();
const signaturesQuery = z.object({ objectType: z.string().min(1).max(64), objectId: z.string().min(1).max(200) });

export function parseWith<T>(schema: z.ZodType<T>, value: unknown, what: string): T {
  if (value === undefined) throw new HttpError(400, 'validation', 'Invalid request', `${what}: send a JSON object with Content-Type: application/json`);
  const r = schema.safeParse(value);
  if (!r.success) throw validationError(what, r.error.issues);
  return r.data;
}

export function clientAddress(req: Request): string {
  return req.ip ?? req.socket.remoteAddress ?? 'unknown';
}

/** Wrap an async handler so thrown HttpErrors become problem answers. */
export function handle(fn: (req: Request, res: Response) => Promise<void> | void) {
  return (req: Request, res: Response, next: (e?: unknown) => void) => {
    Promise.resolve()
      .then(() => fn(req, res))
      .catch((e: unknown) => (e instanceof HttpError ? sendHttpError(res, e) : next(e)));
  };
}

export function authRouter(auth: AuthService): Router {
  const r = express.Router();
  r.use(express.json({ limit: AUTH_BODY_LIMIT }));
  // Answers carry session and CSRF tokens: never cache them.
  r.use((_req, res, next) => {
    res.setHeader('Cache-Control', 'no-store');
    next();
  });
  const admin = auth.requireRole('administrator');
  const viewer = auth.requireRole('viewer');

  r.post(
    '/login',
    handle(async (req, res) => {
      const b = parseWith(loginBody, req.body, 'login');
      const out = await auth.login(b.name, b.password, clientAddress(req));
      auth.setSessionCookies(res, out);
      res.json({ user: out.user, csrfToken: out.csrfToken, expiresAt: out.expiresAt, mustChangePassword: out.mustChangePassword });
    }),
  );

  r.post(
    '/logout',
    viewer,
    handle((req, res) => {
      const s = auth.session(req.headers.cookie);
      if (s) auth.logout(s.token, s.user);
      auth.clearSessionCookies(res);
      res.status(204).end();
    }),
  );

  r.get(
    '/me',
    handle((req, res) => {
      const s = auth.session(req.headers.cookie);
      if (!s) throw new HttpError(401, 'login-required', 'Login required', 'no valid session: log in with POST /api/auth/login');
      res.json({ user: s.user, csrfToken: s.csrfToken, expiresAt: s.expiresAt, mustChangePassword: s.mustChangePassword });
    }),
  );

  r.post(
    '/password',
    viewer,
    handle(async (req, res) => {
      const b = parseWith(passwordBody, req.body, 'password change');
      const s = auth.session(req.headers.cookie);
      await auth.changeOwnPassword(req.user!, b.currentPassword, b.newPassword, s?.token, clientAddress(req));
      res.status(204).end();
    }),
  );

  r.get('/users', admin, handle((_req, res) => void res.json({ items: auth.listUsers() })));

  r.post(
    '/users',
    admin,
    handle(async (req, res) => {
      const b = parseWith(createUserBody, req.body, 'new user');
      res.status(201).json(await auth.createUser(b, req.user!.name));
    }),
  );

  r.patch(
    '/users/:name',
    admin,
    handle(async (req, res) => {
      const b = parseWith(updateUserBody, req.body, 'user change');
      const { reason, ...change } = b;
      res.json(await auth.updateUser(String(req.params.name), change, req.user!, reason));
    }),
  );

  r.get('/tokens', admin, handle((_req, res) => void res.json({ items: auth.listAnalyzerTokens() })));

  r.post(
    '/tokens',
    admin,
    handle((req, res) => {
      const b = parseWith(tokenBody, req.body, 'analyzer token');
      let t: { id: string; token: string };
      try {
        t = auth.createAnalyzerToken(b.analyzer, b.label ?? '', req.user!.name);
      } catch (e) {
        throw new HttpError(400, 'validation', 'Invalid request', (e as Error).message);
      }
      res.status(201).json({ id: t.id, analyzer: b.analyzer, token: t.token, notice: 'The token is shown once; the server keeps only its hash.' });
    }),
  );

  r.delete(
    '/tokens/:id',
    admin,
    handle((req, res) => {
      if (!auth.revokeAnalyzerToken(String(req.params.id), req.user!.name))
        throw new HttpError(404, 'no-such-token', 'No such token', `no active analyzer token with id ${String(req.params.id)}`);
      res.status(204).end();
    }),
  );

  r.get(
    '/signatures',
    viewer,
    handle((req, res) => {
      const q = parseWith(signaturesQuery, req.query, 'signature query');
      res.json({ items: auth.signaturesFor(q.objectType, q.objectId) });
    }),
  );

  r.use(problemErrorHandler('16 KiB'));
  return r;
}
