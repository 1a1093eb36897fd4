/**
 * The REST routes as data: each has zod schemas for path, query and body (validated on every
 * request) and the name of its core/api response type; the OpenAPI document is generated from
 * the same table, so it cannot drift from what the server checks.
 */
import type { Request, Response, RequestHandler, Router } from 'express';
import { z } from 'zod';
import type { Role } from '../auth/types.ts';
import { validate } from './problem.ts';

export interface RouteInput<P, Q, B> {
  params: P;
  query: Q;
  body: B;
  req: Request;
  res: Response;
}

export interface RouteSpec<P = any, Q = any, B = any> {
  method: 'get' | 'post';
  /** Express path under /api, e.g. '/units/:unit'. */
  path: string;
  summary: string;
  /** Least role needed (when access control is installed). */
  role: Role;
  params?: z.ZodType<P>;
  query?: z.ZodType<Q>;
  body?: z.ZodType<B>;
  /** Name of the response type in core/api/rest.ts, or a media type for non-JSON answers. */
  response: string;
  status?: number;
  /** Returns the JSON body, or undefined when it wrote the response itself. */
  handler: (input: RouteInput<P, Q, B>) => Promise<unknown>;
}

export class RouteTable {
  readonly routes: RouteSpec[] = [];

  add<P, Q, B>(spec: RouteSpec<P, Q, B>): void {
    this.routes.push(spec as RouteSpec);
  }

  mount(router: Router, guard: (role: Role) => RequestHandler): void {
    for (const r of this.routes) {
      router[r.method](r.path, guard(r.role), async (req, res) => {
        const params = r.params ? validate(r.params, req.params, 'path') : req.params;
        const query = r.query ? validate(r.query, req.query, 'query') : {};
        const body = r.body ? validate(r.body, req.body, 'body') : undefined;
        const out = await r.handler({ params, query, body, req, res });
        if (out !== undefined && !res.headersSent) res.status(r.status ?? 200).json(out);
      });
    }
  }

  openapi(info: { version: string }): unknown {
    const paths: Record<string, Record<string, unknown>> = {};
    for (const r of this.routes) {
      const p = '/api' + r.path.replace(/:([A-Za-z]+)/g, '{$1}');
      const parameters: unknown[] = [];
      for (const [where, schema] of [['path', r.params], ['query', r.query]] as const) {
        if (!schema) continue;
        const js = z.toJSONSchema(schema, { io: 'input', unrepresentable: 'any' }) as { properties?: Record<string, unknown>; required?: string[] };
        for (const [name, s] of Object.entries(js.properties ?? {})) {
          parameters.push({ name, in: where, required: where === 'path' || (js.required ?? []).includes(name), schema: s });
        }
      }
      const op: Record<string, unknown> = {
        summary: r.summary,
        'x-required-role': r.role,
        parameters,
        responses: {
          [String(r.status ?? 200)]: {
            description: `${r.response} (see core/api/rest.ts)`,
            content: r.response.includes('/') ? { [r.response]: {} } : { 'application/json': { schema: { $ref: `#/components/schemas/${r.response}` } } },
          },
          default: { description: 'RFC 9457 problem details', content: { 'application/problem+json': { schema: { $ref: '#/components/schemas/Problem' } } } },
        },
      };
      if (r.body) {
        op.requestBody = { required: true, content: { 'application/json': { schema: z.toJSONSchema(r.body, { io: 'input', unrepresentable: 'any' }) } } };
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
    for (const r of this.routes) {
      if (!r.response.includes('/') && !schemas[r.response]) {
        schemas[r.response] = { type: 'object', description: `TypeScript type ${r.response} in core/api/rest.ts` };
      }
    }
    return {
      openapi: '3.1.0',
      info: {
        title: 'Tideline REST API',
        version: info.version,
        description: 'Tideline advises; the site\'s validated control strategy, interlocks and procedures decide what a signal may do.',
      },
      paths,
      components: { schemas },
    };
  }
}
