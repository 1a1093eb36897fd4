/**
 * REST: a batch's laboratory values.
 *
 * | method | path                              | role     | what |
 * | ------ | --------------------------------- | -------- | ---- |
 * | GET    | /api/batches/:batch/lab-values    | viewer   | every value ever entered, corrections marked (BatchLabValues) |
 * | POST   | /api/batches/:batch/lab-values    | operator | attach one result (AddLabValueRequest), matched to the spectrum nearest its sample time; audited |
 *
 * A value is never overwritten: a second value on a spectrum that has one is refused (409, naming
 * it) unless it supersedes it with a reason. A sample further than lab.matchToleranceMs from every
 * spectrum is refused (422) naming both times.
 */
import { z } from 'zod';
import type { BatchLabValues, LabValueView } from '../../core/api/rest.ts';
import { labPropertySummary } from '../../core/lab/lab-values.ts';
import type { ServerContext } from '../context.ts';
import { attachLabValues, LabEntryError } from '../transfer/lab-entry.ts';
import { userOf } from './audit-helper.ts';
import { HttpProblem, notFound } from './problem.ts';
import type { RouteTable } from './route-table.ts';
import { idSchema } from './routes-plant.ts';
import { batchLabValueViews } from './views.ts';

const batchParams = z.object({ batch: idSchema });
const text = (max: number) => z.string().trim().min(1).max(max);

export const addLabValueSchema = z
  .strictObject({
    property: text(64).describe('property name, e.g. moisture (normalised: lower case, blanks as _)'),
    value: z.number().finite(),
    unit: z.string().trim().max(32).describe("e.g. '% w/w'; '' for none"),
    sampleT: z
      .union([z.number().finite().min(1e11, 'ms since the epoch (1973 onwards)'), z.string().min(1).max(40)])
      .optional()
      .describe('when the sample was taken: ms since the epoch, or ISO 8601 with its zone'),
    elapsedMin: z.number().finite().min(0).optional().describe('or: minutes after the batch start'),
    method: text(64).optional().describe('reference method, e.g. LOD'),
    supersedes: z.string().min(1).max(64).optional().describe('id of the value this one corrects (needs reason)'),
    reason: text(2000).optional(),
  })
  .refine((b) => (b.sampleT === undefined) !== (b.elapsedMin === undefined), { message: 'give the sample time once: sampleT or elapsedMin', path: ['sampleT'] })
  .refine((b) => b.supersedes === undefined || b.reason !== undefined, { message: 'a correction (supersedes) needs a reason', path: ['reason'] });

export function addLabRoutes(t: RouteTable, ctx: ServerContext) {
  const load = async (id: string) => {
    const b = await ctx.storage.getBatch(id);
    if (!b) throw notFound(`batch "${id}" does not exist`);
    return b;
  };

  t.add({
    method: 'get', path: '/batches/:batch/lab-values', summary: "A batch's laboratory values: every value entered, corrections marked, the effective ones counted per property", role: 'viewer',
    params: batchParams, response: 'BatchLabValues',
    handler: async ({ params }): Promise<BatchLabValues> => {
      const b = await load(params.batch);
      const items = await batchLabValueViews(ctx.storage, b);
      return { batch: b.id, matchToleranceMs: ctx.config.lab.matchToleranceMs, items, properties: labPropertySummary(items) };
    },
  });

  t.add({
    method: 'post', path: '/batches/:batch/lab-values', summary: 'Attach a lab result to the spectrum nearest its sample time (never overwriting; a correction supersedes with a reason); audited', role: 'operator',
    params: batchParams, body: addLabValueSchema, status: 201, response: 'LabValueView',
    handler: async ({ params, body, req }): Promise<LabValueView> => {
      await load(params.batch);
      try {
        const [v] = await attachLabValues(ctx.storage, [{ batch: params.batch, ...body }], {
          toleranceMs: ctx.config.lab.matchToleranceMs, user: userOf(req), now: ctx.now(), audit: ctx.audit, action: 'lab-value.add', via: 'api',
        });
        return v!;
      } catch (e) {
        if (e instanceof LabEntryError) {
          const title = e.status === 409 ? 'Lab value conflict' : e.status === 404 ? 'Not found' : 'Lab value refused';
          const field = e.code === 'lab-value-no-spectrum' ? 'body.sampleT' : e.code === 'lab-value-conflict' ? 'body.supersedes' : 'body';
          throw new HttpProblem(e.status, title, e.message, e.code, [{ path: field, message: e.message }]);
        }
        throw e;
      }
    },
  });
}
