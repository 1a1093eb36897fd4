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
import { nameSchema } from '../../core/io/names.ts';
import express, { type Request, type Router } from 'express';
import { z } from 'zod';
import { RouteTable, type RouteValidator } from '../api/route-table.ts';
import type { AuthService } from './auth-service.ts';
import { HttpProblem } from '../api/problem.ts';
import { problemErrorHandler, validationError } from './http-problem.ts';
import { ROLES, type AuthUser } from './types.ts';

export const AUTH_BODY_LIMIT = '16kb';

/** Answer of POST /api/auth/login and GET /api/auth/me. */
export interface LoginResponse {
  user: AuthUser;
  csrfToken: string;
  expiresAt: number;
  mustChangePassword: boolean;
}

/** Answer of POST /api/auth/tokens: the token is shown this once. */
export interface CreatedAnalyzerToken {
  id: string;
  analyzer: string;
  token: string;
  notice: string;
}

const loginBody = z.object({ name: z.string().min(1).max(64), password: z.string().min(1).max(256) }).strict();
const passwordBody = z.object({ currentPassword: z.string().min(1).max(256), newPassword: z.string().min(1).max(256) }).strict();
const createUserBody = z
  .object({
    name: z.string().min(1).max(64),
    fullName: nameSchema({ empty: true }).optional(),
    role: z.enum(ROLES),
    password: z.string().min(1).max(256),
    mustChangePassword: z.boolean().optional(),
  })
  .strict();
const updateUserBody = z
  .object({
    role: z.enum(ROLES).optional(),
    fullName: nameSchema({ empty: true }).optional(),
    disabled: z.boolean().optional(),
    password: z.string().min(1).max(256).optional(),
    mustChangePassword: z.boolean().optional(),
    reason: z.string().max(2000).optional(),
  })
  .strict();
const tokenBody = z.object({ analyzer: z.string().min(1).max(64), label: nameSchema({ empty: true }).optional() }).strict();
const signaturesQuery = z.object({ objectType: z.string().min(1).max(64), objectId: z.string().min(1).max(200) });

export function parseWith<T>(schema: z.ZodType<T>, value: unknown, what: string): T {
  if (value === undefined) throw new HttpProblem(400, 'Invalid request', `${what}: send a JSON object with Content-Type: application/json`, 'validation');
  const r = schema.safeParse(value);
  if (!r.success) throw validationError(what, r.error.issues);
  return r.data;
}

export function clientAddress(req: Request): string {
  return req.ip ?? req.socket.remoteAddress ?? 'unknown';
}

/** Validation as the auth and audit routes always answered: kind 'validation', field paths without a prefix. */
export const authValidate: RouteValidator = (schema, data, where, route) => parseWith(schema, data, route.subject ?? `request ${where}`);

const nameParam = z.object({ name: z.string().min(1) });
const idParam = z.object({ id: z.string().min(1) });
const SOURCE = 'server/auth/types.ts';

/** The /api/auth routes as a table (paths relative to /api/auth). */
export function authRoutes(auth: AuthService): RouteTable {
  const t = new RouteTable({ validate: authValidate });

  t.add({
    method: 'post', path: '/login', summary: 'Log in: sets the session and CSRF cookies', role: 'public',
    body: loginBody, subject: 'login', response: 'LoginResponse', responseSource: 'server/auth/auth-routes.ts',
    handler: async ({ body, req, res }): Promise<LoginResponse> => {
      const out = await auth.login(body.name, body.password, clientAddress(req));
      auth.setSessionCookies(res, out);
      return { user: out.user, csrfToken: out.csrfToken, expiresAt: out.expiresAt, mustChangePassword: out.mustChangePassword };
    },
  });

  t.add({
    method: 'post', path: '/logout', summary: 'End the session', role: 'viewer', response: '', status: 204,
    handler: async ({ req, res }) => {
      const s = await auth.session(req.headers.cookie);
      if (s) await auth.logout(s.token, s.user);
      auth.clearSessionCookies(res);
      return undefined;
    },
  });

  t.add({
    method: 'get', path: '/me', summary: "The session's user and CSRF token (401 without a valid session)", role: 'public',
    response: 'LoginResponse', responseSource: 'server/auth/auth-routes.ts',
    handler: async ({ req }): Promise<LoginResponse> => {
      const s = await auth.session(req.headers.cookie);
      if (!s) throw new HttpProblem(401, 'Login required', 'no valid session: log in with POST /api/auth/login', 'login-required');
      return { user: s.user, csrfToken: s.csrfToken, expiresAt: s.expiresAt, mustChangePassword: s.mustChangePassword };
    },
  });

  t.add({
    method: 'post', path: '/password', summary: 'Change your own password', role: 'viewer', body: passwordBody, subject: 'password change', response: '', status: 204,
    handler: async ({ body, req }) => {
      const s = await auth.session(req.headers.cookie);
      await auth.changeOwnPassword(req.user!, body.currentPassword, body.newPassword, s?.token, clientAddress(req));
      return undefined;
    },
  });

  t.add({
    method: 'get', path: '/users', summary: 'All users', role: 'administrator', response: 'Items<UserView>', responseSource: 'server/auth/user-store.ts',
    handler: async () => ({ items: await auth.listUsers() }),
  });

  t.add({
    method: 'post', path: '/users', summary: 'Create a user', role: 'administrator', body: createUserBody, subject: 'new user',
    response: 'UserView', responseSource: 'server/auth/user-store.ts', status: 201,
    handler: async ({ body, req }) => auth.createUser(body, req.user!.name),
  });

  t.add({
    method: 'patch', path: '/users/:name', summary: "Change a user's role, name, password or disabled flag (audited with the reason)", role: 'administrator',
    params: nameParam, body: updateUserBody, subject: 'user change', response: 'UserView', responseSource: 'server/auth/user-store.ts',
    handler: async ({ params, body, req }) => {
      const { reason, ...change } = body;
      return auth.updateUser(params.name, change, req.user!, reason);
    },
  });

  t.add({
    method: 'get', path: '/tokens', summary: 'Analyzer tokens (never the token itself)', role: 'administrator', response: 'Items<AnalyzerTokenInfo>', responseSource: SOURCE,
    handler: async () => ({ items: await auth.listAnalyzerTokens() }),
  });

  t.add({
    method: 'post', path: '/tokens', summary: 'Create an analyzer token (shown once)', role: 'administrator', body: tokenBody, subject: 'analyzer token',
    response: 'CreatedAnalyzerToken', responseSource: 'server/auth/auth-routes.ts', status: 201,
    handler: async ({ body, req }): Promise<CreatedAnalyzerToken> => {
      let t: { id: string; token: string };
      try {
        t = await auth.createAnalyzerToken(body.analyzer, body.label ?? '', req.user!.name);
      } catch (e) {
        throw new HttpProblem(400, 'Invalid request', (e as Error).message, 'validation');
      }
      return { id: t.id, analyzer: body.analyzer, token: t.token, notice: 'The token is shown once; the server keeps only its hash.' };
    },
  });

  t.add({
    method: 'delete', path: '/tokens/:id', summary: 'Revoke an analyzer token (404 when unknown or already revoked)', role: 'administrator',
    params: idParam, response: '', status: 204,
    handler: async ({ params, req }) => {
      if (!(await auth.revokeAnalyzerToken(params.id, req.user!.name)))
        throw new HttpProblem(404, 'No such token', `no active analyzer token with id ${params.id}`, 'no-such-token');
      return undefined;
    },
  });

  t.add({
    method: 'get', path: '/signatures', summary: 'Electronic signatures on one object', role: 'viewer', query: signaturesQuery, subject: 'signature query',
    response: 'Items<SignatureRecord>', responseSource: SOURCE,
    handler: async ({ query }) => ({ items: await auth.signaturesFor(query.objectType, query.objectId) }),
  });

  return t;
}

export function authRouter(auth: AuthService, table: RouteTable = authRoutes(auth)): Router {
  const r = express.Router();
  // Answers carry session and CSRF tokens: never cache them.
  r.use((_req, res, next) => {
    res.setHeader('Cache-Control', 'no-store');
    next();
  });
  // bodies (up to 16 KiB) are read after the role check, only by routes that take one
  table.mount(r, (role) => auth.requireRole(role), { bodyParser: express.json({ limit: AUTH_BODY_LIMIT }) });
  r.use(problemErrorHandler('16 KiB'));
  return r;
}
