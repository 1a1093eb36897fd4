/**
 * The REST routes as data: each has zod schemas for path, query and body (validated on every
 * request), the least role it needs and the name of its response type; the OpenAPI document is
 * generated from the same tables, so it cannot drift from what the server checks.
 *
 * One table lives on ServerContext (`ctx.routes`, mounted on /api by server/app.ts); parts may add
 * to it before it is mounted (server/signals, server/transfer). Parts that mount their own router
 * with router-wide middleware (server/auth: its body limit and no-store; server/audit) build their
 * own table, mount it on that router, and `include` it in ctx.routes under their prefix so the
 * OpenAPI document lists their routes too.
 */
import type { Request, Response, RequestHandler, Router } from 'express';
import { z } from 'zod';
import { CSRF_HEADER, SESSION_COOKIE, type Role } from '../auth/types.ts';
import { validate as validateProblem } from './problem.ts';

export interface RouteInput<P, Q, B> {
  params: P;
  query: Q;
  body: B;
  req: Request;
  res: Response;
}

export type RouteMethod = 'get' | 'post' | 'put' | 'patch' | 'delete';
/** 'public': no session check (login; GET /api/auth/me answers 401 itself). */
export type RouteAccess = Role | 'public';
export type RoutePart = 'path' | 'query' | 'body';

/** Parses one part of a request; on failure throws an error that names each offending field. */
export type RouteValidator = <T>(schema: z.ZodType<T>, data: unknown, where: RoutePart, route: RouteSpec) => T;

export interface RouteSpec<P = any, Q = any, B = any> {
  method: RouteMethod;
  /** Express path, e.g. '/units/:unit' (under /api, or under the prefix of an included table). */
  path: string;
  summary: string;
  /** Least role needed (when access control is installed), or 'public'. */
  role: RouteAccess;
  params?: z.ZodType<P>;
  query?: z.ZodType<Q>;
  body?: z.ZodType<B>;
  /** The body may be left out (default: required when `body` is given). */
  bodyOptional?: boolean;
  /** Media type of the request body in the OpenAPI document (default application/json). */
  bodyType?: string;
  /**
   * Reads this route's body, after the role check, instead of the table's JSON parser
   * (POST /api/import: 64 MB instead of 1 MB).
   */
  bodyParser?: RequestHandler;
  /** What the request is called in validation messages (auth: 'login', 'new user'). */
  subject?: string;
  /**
   * Name of the response type, or one or more media types (comma-separated) for answers that are
   * not a typed JSON object, or '' for none (204).
   */
  response: string;
  /** Where the response type is declared (default core/api/rest.ts). */
  responseSource?: string;
  status?: number;
  /** Returns the JSON body, or undefined when it wrote the response itself (or for a 204). */
  handler: (input: RouteInput<P, Q, B>) => Promise<unknown>;
}

export interface MountOptions {
  /** Parser for routes with a `body` schema and no bodyParser of their own (run after the role check). */
  bodyParser?: RequestHandler;
}

const JSON_TYPE = 'application/json';
const defaultValidate: RouteValidator = (schema, data, where) => validateProblem(schema, data, where);

/** '/auth' + '/' → '/auth'; ':name' → '{name}'. */
export function openapiPath(prefix: string, path: string): string {
  const full = (prefix + path).replace(/(.)\/$/, '$1');
  return full.replace(/:([A-Za-z_][A-Za-z0-9_]*)/g, '{$1}');
}

export class RouteTable {
  readonly routes: RouteSpec[] = [];
  /** Tables mounted by their parts on their own routers, documented here under their prefix. */
  readonly included: { prefix: string; table: RouteTable }[] = [];
  private readonly validateWith: RouteValidator;

  constructor(opts: { validate?: RouteValidator } = {}) {
    this.validateWith = opts.validate ?? defaultValidate;
  }

  add<P, Q, B>(spec: RouteSpec<P, Q, B>): void {
    if (spec.bodyParser && !spec.body) throw new Error(`route ${spec.method} ${spec.path}: bodyParser without a body schema`);
    if (this.routes.some((r) => r.method === spec.method && r.path === spec.path)) throw new Error(`route ${spec.method} ${spec.path} added twice`);
    this.routes.push(spec as RouteSpec);
  }

  include(prefix: string, table: RouteTable): void {
    this.included.push({ prefix, table });
  }

  /** Every route with the path it is served at relative to this table's mount point. */
  all(): { path: string; route: RouteSpec }[] {
    const out = this.routes.map((route) => ({ path: route.path, route }));
    for (const { prefix, table } of this.included) for (const x of table.all()) out.push({ path: prefix + x.path, route: x.route });
    return out;
  }

  /** Mounts this table's own routes (not the included ones: their parts mount those). */
  mount(router: Router, guard: (role: Role) => RequestHandler, opts: MountOptions = {}): void {
    for (const r of this.routes) {
      const chain: RequestHandler[] = [];
      if (r.role !== 'public') chain.push(guard(r.role));
      const parser = r.bodyParser ?? (r.body ? opts.bodyParser : undefined);
      if (parser) chain.push(parser);
      router[r.method](r.path, ...chain, async (req: Request, res: Response) => {
        const params = r.params ? this.validateWith(r.params, req.params, 'path', r) : req.params;
        const query = r.query ? this.validateWith(r.query, req.query, 'query', r) : {};
        const body = r.body ? (r.bodyOptional && req.body === undefined ? undefined : this.validateWith(r.body, req.body, 'body', r)) : undefined;
        const out = await r.handler({ params, query, body, req, res });
        if (res.headersSent) return;
        if (out !== undefined) res.status(r.status ?? 200).json(out);
        else if (r.status === 204) res.status(204).end();
      });
    }
  }

  openapi(info: { version: string }): unknown {
    const paths: Record<string, Record<string, unknown>> = {};
    const all = this.all();
    for (const { path, route: r } of all) {
      const p = openapiPath('/api', path);
      const parameters: unknown[] = [];
      for (const [where, schema] of [['path', r.params], ['query', r.query]] as const) {
        if (!schema) continue;
        const js = z.toJSONSchema(schema, { io: 'input', unrepresentable: 'any' }) as { properties?: Record<string, unknown>; required?: string[] };
        for (const [name, s] of Object.entries(js.properties ?? {})) {
          parameters.push({ name, in: where, required: where === 'path' || (js.required ?? []).includes(name), schema: s });
        }
      }
      const status = String(r.status ?? 200);
      const source = r.responseSource ?? 'core/api/rest.ts';
      const ok: Record<string, unknown> =
        r.response === ''
          ? { description: 'no content' }
          : r.response.includes('/')
            ? { description: r.response, content: Object.fromEntries(r.response.split(',').map((t) => [t.trim(), {}])) }
            : { description: `${r.response} (see ${source})`, content: { [JSON_TYPE]: { schema: { $ref: `#/components/schemas/${schemaName(r.response)}` } } } };
      const op: Record<string, unknown> = {
        summary: r.summary,
        'x-required-role': r.role === 'public' ? 'none' : r.role,
        security: r.role === 'public' ? [] : r.method === 'get' ? [{ session: [] }] : [{ session: [], csrf: [] }],
        parameters,
        responses: {
          [status]: ok,
          default: { description: 'RFC 9457 problem details', content: { 'application/problem+json': { schema: { $ref: '#/components/schemas/Problem' } } } },
        },
      };
      if (r.body) {
        op.requestBody = { required: !r.bodyOptional, content: { [r.bodyType ?? JSON_TYPE]: { schema: z.toJSONSchema(r.body, { io: 'input', unrepresentable: 'any' }) } } };
      }
      (paths[p] ??= {})[r.method] = op;
    }
    const schemas: Record<string, unknown> = {
      Problem: {
        type: 'object',
        required: ['type', 'title', 'status'],
        properties: {
          type: { type: 'string' }, title: { type: 'string' }, status: { type: 'integer' }, detail: { type: 'string' }, instance: { type: 'string' },
          errors: { type: 'array', items: { type: 'object', properties: { path: { type: 'string' }, message: { type: 'string' } } } },
        },
      },
    };
    for (const { route: r } of all) {
      const name = schemaName(r.response);
      if (r.response !== '' && !r.response.includes('/') && !schemas[name]) {
        schemas[name] = { type: 'object', description: `TypeScript type ${r.response} in ${r.responseSource ?? 'core/api/rest.ts'}` };
      }
    }
    return {
      openapi: '3.1.0',
      info: {
        title: 'Tideline REST API',
        version: info.version,
        description:
          "Tideline advises; the site's validated control strategy, interlocks and procedures decide what a signal may do. " +
          "x-required-role names the least role an operation needs ('none': no session). Writes also need the CSRF header.",
      },
      paths,
      components: {
        schemas,
        securitySchemes: {
          session: { type: 'apiKey', in: 'cookie', name: SESSION_COOKIE, description: 'session cookie set by POST /api/auth/login' },
          csrf: { type: 'apiKey', in: 'header', name: CSRF_HEADER, description: 'csrfToken from POST /api/auth/login or GET /api/auth/me' },
        },
      },
    };
  }
}

/** Component names may not hold '<' or '>' (Page<Alarm> → Page_Alarm). */
function schemaName(type: string): string {
  return type.replace(/[^A-Za-z0-9._-]+/g, '_').replace(/_+$/, '');
}
