/** REST: batches — list and filter, detail, spectra and results by seq range, contributions, CSV export. */
import { z } from 'zod';
import { csvCell, propertyColumnHeader } from '../../core/io/batch-csv.ts';
import { labPropertyColumns } from '../../core/lab/lab-values.ts';
import type { BatchSummary, ContributionsResponse, Page, ResultsRange, SpectraRange } from '../../core/api/rest.ts';
import type { ServerContext } from '../context.ts';
import { notFound, HttpProblem } from './problem.ts';
import type { RouteTable } from './route-table.ts';
import { batchDetail, batchSummary, modelRef } from './views.ts';
import { idSchema, pageQuery } from './routes-plant.ts';
import { isoTimeOrNull } from '../../core/protocol/plausibility.ts';

const batchParams = z.object({ batch: idSchema });
const rangeQuery = z.object({
  fromSeq: z.coerce.number().int().min(0).default(0),
  toSeq: z.coerce.number().int().min(0).default(Number.MAX_SAFE_INTEGER),
  limit: z.coerce.number().int().min(1).max(20000).default(2000),
}).refine((q) => q.fromSeq <= q.toSeq, { message: 'fromSeq must not be greater than toSeq', path: ['fromSeq'] });
const timeQuery = z.union([z.coerce.number().finite().min(0), z.iso.datetime().transform((s) => Date.parse(s))]);

export function addBatchRoutes(t: RouteTable, ctx: ServerContext) {
  const load = async (id: string) => {
    const b = await ctx.storage.getBatch(id);
    if (!b) throw notFound(`batch "${id}" does not exist`);
    return b;
  };

  t.add({
    method: 'get', path: '/batches', summary: 'Batches, newest first, filtered by unit, product, status and start time', role: 'viewer', response: 'Page<BatchSummary>',
    query: z.object({ unit: idSchema.optional(), product: z.string().max(128).optional(), status: z.enum(['open', 'ended']).optional(), from: timeQuery.optional(), to: timeQuery.optional(), ...pageQuery }),
    handler: async ({ query }): Promise<Page<BatchSummary>> => {
      const r = await ctx.storage.listBatches(query);
      const items = await Promise.all(r.items.map((b) => batchSummary(ctx.storage, ctx.ingest, b)));
      return { items, total: r.total, limit: query.limit, offset: query.offset };
    },
  });
  t.add({
    method: 'get', path: '/batches/:batch', summary: 'One batch: summary, axis, latest result, endpoint events, alarms', role: 'viewer', response: 'BatchDetail',
    params: batchParams,
    handler: async ({ params }) => batchDetail(ctx.storage, ctx.ingest, await load(params.batch)),
  });
  t.add({
    method: 'get', path: '/batches/:batch/spectra', summary: 'Raw spectra of a batch by seq range', role: 'viewer', response: 'SpectraRange',
    params: batchParams, query: rangeQuery,
    handler: async ({ params, query }): Promise<SpectraRange> => {
      const b = await load(params.batch);
      const rows = await ctx.storage.readSpectra(b.id, query.fromSeq, query.toSeq, query.limit + 1);
      const more = rows.length > query.limit;
      const items = rows.slice(0, query.limit).map((s) => ({ seq: s.seq, t: s.t, values: Array.from(s.values) }));
      return { batch: b.id, axis: Array.from(b.axis), items, nextSeq: more ? rows[query.limit]!.seq : null };
    },
  });
  t.add({
    method: 'get', path: '/batches/:batch/results', summary: 'Monitor results of a batch by seq range', role: 'viewer', response: 'ResultsRange',
    params: batchParams, query: rangeQuery,
    handler: async ({ params, query }): Promise<ResultsRange> => {
      const b = await load(params.batch);
      const rows = await ctx.storage.readResults(b.id, query.fromSeq, query.toSeq, query.limit + 1);
      const m = b.modelVersion ? await ctx.storage.getModelVersion(b.modelVersion) : null;
      const more = rows.length > query.limit;
      return { batch: b.id, model: m ? modelRef(m) : null, items: rows.slice(0, query.limit), nextSeq: more ? rows[query.limit]!.seq : null };
    },
  });
  t.add({
    method: 'get', path: '/batches/:batch/endpoint-events', summary: 'Endpoint state changes of a batch', role: 'viewer', response: 'Page<EndpointEventRecord>',
    params: batchParams,
    handler: async ({ params }) => {
      const b = await load(params.batch);
      const items = await ctx.storage.listEndpointEvents(b.id);
      return { items, total: items.length, limit: items.length, offset: 0 };
    },
  });
  t.add({
    method: 'get', path: '/batches/:batch/contributions', summary: 'Variable contributions to T² and Q for one spectrum of a batch', role: 'viewer', response: 'ContributionsResponse',
    params: batchParams, query: z.object({ seq: z.coerce.number().int().min(0) }),
    handler: async ({ params, query }): Promise<ContributionsResponse> => {
      const b = await load(params.batch);
      if (!b.modelVersion) throw new HttpProblem(409, 'Conflict', `batch ${b.id} was not judged by a model (none was deployed to ${b.unit} when it started)`);
      const s = await ctx.storage.getSpectrumBySeq(b.id, query.seq);
      if (!s) throw notFound(`batch ${b.id} has no spectrum with seq ${query.seq}`);
      const core = await ctx.ingest.getCore();
      const model = (await ctx.ingest.loadModel(b.modelVersion))!;
      const mon = core.createBatchMonitor(model, b.startT);
      const m = (await ctx.storage.getModelVersion(b.modelVersion))!;
      return { batch: b.id, seq: s.seq, t: s.t, model: modelRef(m), contributions: mon.contributions(s.values) };
    },
  });
  t.add({
    method: 'get', path: '/batches/:batch/export.csv', summary: 'A batch as CSV: raw spectra (one row per spectrum, one column per wavelength) or results', role: 'viewer',
    response: 'text/csv', params: batchParams, query: z.object({ what: z.enum(['spectra', 'results']).default('spectra') }),
    handler: async ({ params, query, res }) => {
      const b = await load(params.batch);
      res.status(200).type('text/csv; charset=utf-8').setHeader('Content-Disposition', `attachment; filename="${b.id}-${query.what}.csv"`);
      if (query.what === 'spectra') {
        // The lab values in force ride in a `name [unit]` column each, empty where a spectrum has none.
        const lab = labPropertyColumns(await ctx.storage.listLabValues(b.id), (await ctx.storage.spectrumTimes(b.id)).length);
        const props = Object.keys(lab.properties);
        const labHeaders = props.map((k) => csvCell(propertyColumnHeader(k, lab.propertyUnits[k]!)));
        res.write(['seq', 't_ms', 'time_utc', ...labHeaders, ...Array.from(b.axis, (nm) => `nm_${nm}`)].join(',') + '\r\n');
        let i = 0;
        for await (const s of ctx.storage.iterateSpectra(b.id)) {
          const labCells = props.map((k) => {
            const v = lab.properties[k]![i];
            return v === undefined || Number.isNaN(v) ? '' : String(v);
          });
          res.write(`${s.seq},${s.t},${isoTimeOrNull(s.t) ?? ''},${labCells.map((c) => c + ',').join('')}${Array.from(s.values).join(',')}\r\n`);
          i++;
        }
      } else {
        let header = false;
        let from = 0;
        for (;;) {
          const rows = await ctx.storage.readResults(b.id, from, Number.MAX_SAFE_INTEGER, 2000);
          for (const r of rows) {
            if (!header) {
              header = true;
              res.write(['seq', 't_ms', 'time_utc', 'elapsed_min', 'progress', 't2', 't2_limit', 'q', 'q_limit', 'combined', ...r.scores.map((_, i) => `pc${i + 1}`), 'endpoint', 'prediction', 'suspect', 'active_conditions'].join(',') + '\r\n');
            }
            res.write([r.seq, r.t, isoTimeOrNull(r.t) ?? '', r.elapsedMin, r.progress, r.t2, r.limits.t2, r.q, r.limits.q, r.combined, ...r.scores, r.endpoint.state, r.prediction?.value ?? '', r.suspect, `"${r.activeConditions.join(' ')}"`].join(',') + '\r\n');
          }
          if (rows.length < 2000) break;
          from = rows[rows.length - 1]!.seq + 1;
        }
        if (!header) res.write('seq,t_ms,time_utc\r\n');
      }
      res.end();
      return undefined;
    },
  });
}
