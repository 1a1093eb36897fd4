/**
 * REST: derived views for the dashboard — spectrum view and calibration diagnostics.
 * (The batch comparison, GET /api/batches/:batch/comparison, is served by server/transfer.)
 */
import { z } from 'zod';
import type { CalibrationView, SpectrumView } from '../../core/api/rest.ts';
import { calibrationDiagnostics } from '../../core/model/calibration-diagnostics.ts';
import type { MonitoringModel } from '../../core/model/monitoring-model.ts';
import type { ServerContext } from '../context.ts';
import { HttpProblem, notFound } from './problem.ts';
import type { RouteTable } from './route-table.ts';
import { idSchema } from './routes-plant.ts';

export function addViewRoutes(t: RouteTable, ctx: ServerContext) {
  const model = async (versionId: string) => {
    const row = await ctx.storage.getModelVersion(versionId);
    if (!row) throw notFound(`model version "${versionId}" does not exist`);
    return { row, model: (await ctx.ingest.loadModel(versionId)) as unknown as MonitoringModel };
  };
  const batch = async (id: string) => {
    const b = await ctx.storage.getBatch(id);
    if (!b) throw notFound(`batch "${id}" does not exist`);
    return b;
  };

  t.add({
    method: 'get', path: '/batches/:batch/spectrum-view', summary: 'One spectrum raw and after the preprocessing of the model that judged the batch', role: 'viewer',
    response: 'SpectrumView', params: z.object({ batch: idSchema }), query: z.object({ seq: z.coerce.number().int().min(0) }),
    handler: async ({ params, query }): Promise<SpectrumView> => {
      const b = await batch(params.batch);
      const s = await ctx.storage.getSpectrumBySeq(b.id, query.seq);
      if (!s) throw notFound(`batch ${b.id} has no spectrum with seq ${query.seq}`);
      let preprocessed: SpectrumView['preprocessed'] = null;
      if (b.modelVersion) {
        const { model: m } = await model(b.modelVersion);
        const out = m.chain.apply(s.values);
        preprocessed = { axis: Array.from(m.chain.outputAxis), values: Array.from(out), goldenMean: null, goldenLower: null, goldenUpper: null };
      }
      return { batch: b.id, seq: s.seq, t: s.t, raw: { axis: Array.from(b.axis), values: Array.from(s.values), goldenMean: null, goldenLower: null, goldenUpper: null }, preprocessed };
    },
  });

  t.add({
    method: 'get', path: '/models/versions/:version/calibration', summary: 'Calibration diagnostics: explained variance, cross-validation, loadings, T² and Q of the calibration spectra', role: 'viewer',
    response: 'CalibrationView', params: z.object({ version: z.string().min(1).max(128) }),
    handler: async ({ params }): Promise<CalibrationView> => {
      const { row, model: m } = await model(params.version);
      const d = calibrationDiagnostics(m);
      return {
        versionId: row.id, explained: d.explained, cumulative: d.cumulative, press: d.press, recommended: d.recommended,
        modelAxis: d.loadings.axis, loadings: d.loadings.pcs,
        samples: d.sampleT2.map((t2, i) => ({ batch: d.sampleBatch[i]!, index: d.sampleIndex[i]!, t2, q: d.sampleQ[i]!, excluded: false })),
        limits: { t2: d.limits.t2, q: d.limits.q, confidence: d.limits.confidence },
      };
    },
  });
}
