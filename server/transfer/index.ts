/**
 * Bringing batches in and taking results out (installed by server/app.ts):
 *
 * | method | path                                         | role        | what |
 * | ------ | -------------------------------------------- | ----------- | ---- |
 * | POST   | /api/import                                  | model-owner | import CSV / JCAMP-DX files (JSON body, see ImportBody) in one transaction |
 * | GET    | /api/batches/:batch/comparison?version=      | viewer      | DTW comparison with the golden batches (core compareBatch) |
 * | GET    | /api/batches/:batch/export.jdx               | viewer      | the batch's raw spectra (and lab values, ##$LAB labels) as a JCAMP-DX compound file |
 * | GET    | /api/batches/:batch/report.html              | viewer      | printable report |
 * | GET    | /api/batches/:batch/report.pdf               | viewer      | the same report as PDF (headless Chromium) |
 * | GET    | /api/models/versions/:version/model.json     | viewer      | the model file exactly as stored (hash inside) |
 *
 * Batch CSV export is in the batch routes (/api/batches/:batch/export.csv); the audit trail's
 * export in /api/audit. The routes are in the server's route table (ctx.routes): validated by the
 * zod schemas here and listed in /api/openapi.json; POST /api/import reads its body with its own
 * larger limit, after the role check.
 */
import express, { type Request } from 'express';
import { z } from 'zod';
import { writeBatchJcamp } from '../../core/io/batch-jcamp.ts';
import { ImportError } from '../../core/io/imported-batch.ts';
import { labPropertyColumns } from '../../core/lab/lab-values.ts';
import { nameSchema } from '../../core/io/names.ts';
import { HttpProblem, notFound } from '../api/problem.ts';
import type { ServerContext } from '../context.ts';
import { renderBatchReport } from './batch-report.ts';
import { importBatches } from './import-batches.ts';
import { htmlToPdf, PdfUnavailableError } from './report-pdf.ts';
import { compareStoredBatch, loadBatch, reportData } from './review.ts';

/** Imports can be large (a batch of 500 spectra × 1,000 points is about 5 MB of CSV). */
export const IMPORT_BODY_LIMIT = '64mb';
/** From this many characters of files on, POST /api/import parses in a worker thread. */
export const IMPORT_WORKER_MIN_CHARS = 1_000_000;

const idSchema = z.string().min(1).max(128).regex(/^[A-Za-z0-9._:-]+$/, 'use letters, digits and . _ : - only');

export const importBodySchema = z.object({
  unit: idSchema,
  product: nameSchema({ max: 128 }),
  files: z
    .array(z.object({ name: z.string().min(1).max(256), content: z.string().max(60 * 1024 * 1024), format: z.enum(['csv', 'jcamp']).optional() }))
    .min(1)
    .max(500),
  csv: z
    .object({
      delimiter: z.enum([',', ';', '\t']).optional(),
      decimal: z.enum(['.', ',']).optional(),
      axisUnit: z.enum(['nm', 'cm-1']).optional(),
      origin: z.number().finite().min(0).optional(),
    })
    .optional(),
  /** Resample onto this model version's input axis. */
  resampleToModel: z.string().min(1).max(128).optional(),
});
export type ImportBody = z.infer<typeof importBodySchema>;

/** Answer of GET /api/batches/:batch/comparison. */
export interface BatchComparisonView {
  batch: string;
  versionId: string;
  comparison: Awaited<ReturnType<typeof compareStoredBatch>>['comparison'];
  /** Stored spectra left out because they cannot be judged (stored by an older version: non-finite values, an impossible time). */
  leftOut: { seq: number; why: string }[];
}

const userName = (req: Request) => req.user?.name ?? 'anonymous';
const batchParams = z.object({ batch: idSchema });
const versionParams = z.object({ version: z.string().min(1).max(128) });

export function install(ctx: ServerContext): void {
  const t = ctx.routes;

  t.add({
    method: 'post', path: '/import', summary: 'Import CSV / JCAMP-DX batch files in one transaction (nothing is imported when one file is refused)', role: 'model-owner',
    body: importBodySchema, bodyParser: express.json({ limit: IMPORT_BODY_LIMIT }), status: 201,
    response: 'ImportSummary', responseSource: 'server/transfer/import-batches.ts',
    handler: async ({ body, req }) => {
      let targetAxis: Float64Array | undefined;
      if (body.resampleToModel) {
        const m = (await ctx.ingest.loadModel(body.resampleToModel)) as { chain: { inputAxis: Float64Array } } | null;
        if (!m) throw notFound(`model version "${body.resampleToModel}" does not exist`);
        targetAxis = m.chain.inputAxis;
      }
      try {
        const summary = await importBatches(ctx.storage, { ...body, targetAxis, user: userName(req) }, ctx.now(), {
          // a large import is parsed in a worker thread, off the thread that acks analyzers; a small
          // one inline (starting the worker costs more than parsing it)
          parseInWorker: body.files.reduce((n, f) => n + f.content.length, 0) >= IMPORT_WORKER_MIN_CHARS,
        });
        ctx.ingest.noteBatchIds(summary.batches.map((b) => b.id));
        await ctx.audit?.record({
          user: userName(req),
          action: 'batch.import',
          object: `unit:${body.unit}`,
          after: {
            files: body.files.map((f) => f.name), batches: summary.batches.map((b) => b.id), resampledToModel: body.resampleToModel ?? null,
            labProperties: summary.properties.map((p) => ({ name: p.name, unit: p.unit, values: p.values })),
          },
        });
        return summary;
      } catch (e) {
        if (e instanceof ImportError) {
          throw new HttpProblem(422, 'Import refused', `${e.message}. Nothing was imported.`, 'import-refused', [{ path: e.line > 0 ? `${e.file}:${e.line}` : e.file, message: e.reason }]);
        }
        throw e;
      }
    },
  });

  t.add({
    method: 'get', path: '/batches/:batch/comparison', summary: 'DTW comparison of a batch with the golden batches of a model version', role: 'viewer',
    params: batchParams, query: z.object({ version: z.string().min(1).max(128).optional() }),
    response: 'BatchComparisonView', responseSource: 'server/transfer/index.ts',
    handler: async ({ params, query }): Promise<BatchComparisonView> => {
      const b = await loadBatch(ctx, params.batch);
      const { versionId, comparison, leftOut } = await compareStoredBatch(ctx, b, query.version);
      return { batch: b.id, versionId, comparison, leftOut };
    },
  });

  t.add({
    method: 'get', path: '/batches/:batch/export.jdx', summary: "The batch's raw spectra as a JCAMP-DX compound file", role: 'viewer',
    params: batchParams, response: 'chemical/x-jcamp-dx',
    handler: async ({ params, res }) => {
      const b = await loadBatch(ctx, params.batch);
      const times: number[] = [];
      const spectra: Float32Array[] = [];
      for await (const s of ctx.storage.iterateSpectra(b.id)) {
        times.push(s.t);
        spectra.push(s.values);
      }
      if (spectra.length === 0) throw new HttpProblem(409, 'No spectra', `batch ${b.id} has no spectra to export`, 'no-spectra');
      res
        .type('chemical/x-jcamp-dx')
        .attachment(`${b.id}.jdx`)
        .send(writeBatchJcamp({ id: b.id, axis: b.axis, times, spectra, product: b.product, unit: b.unit, ...labPropertyColumns(await ctx.storage.listLabValues(b.id), spectra.length) }));
      return undefined;
    },
  });

  t.add({
    method: 'get', path: '/batches/:batch/report.html', summary: 'Printable batch report', role: 'viewer', params: batchParams, response: 'text/html',
    handler: async ({ params, req, res }) => {
      const html = renderBatchReport(await reportData(ctx, params.batch, userName(req)));
      res.type('html').send(html);
      return undefined;
    },
  });

  t.add({
    method: 'get', path: '/batches/:batch/report.pdf', summary: 'The batch report as PDF (headless Chromium; 503 when unavailable)', role: 'viewer', params: batchParams, response: 'application/pdf',
    handler: async ({ params, req, res }) => {
      const id = params.batch;
      const html = renderBatchReport(await reportData(ctx, id, userName(req)));
      try {
        const pdf = await htmlToPdf(html, { title: `Batch report ${id}` });
        await ctx.audit?.record({ user: userName(req), action: 'batch.report', object: `batch:${id}`, after: { format: 'pdf', bytes: pdf.length } });
        res.type('application/pdf').attachment(`${id}-report.pdf`).send(pdf);
      } catch (e) {
        if (e instanceof PdfUnavailableError) throw new HttpProblem(503, 'PDF unavailable', e.message, 'pdf-unavailable');
        throw e;
      }
      return undefined;
    },
  });

  t.add({
    method: 'get', path: '/models/versions/:version/model.json', summary: 'The model file exactly as stored (canonical JSON, SHA-256 inside)', role: 'viewer',
    params: versionParams, response: 'application/json',
    handler: async ({ params, res }) => {
      const m = await ctx.storage.getModelVersion(params.version);
      if (!m) throw notFound(`model version "${params.version}" does not exist`);
      res.type('application/json').attachment(`${m.name}-v${m.version}.json`).send(m.body);
      return undefined;
    },
  });
}
