/**
 * REST: derived views for the dashboard — spectrum view and calibration diagnostics.
 * (The batch comparison, GET /api/batches/:batch/comparison, is served by server/transfer.)
 */
import { z } from 'zod';
import type { CalibrationView, SpectrumView } from '../../core/api/rest.ts';
import { calibrationDiagnostics } from '../../core/model/calibration-diagnostics.ts';
import type { MonitoringModel } from '../../core/model/monitoring-model.ts';
import type { ServerContext } from '../context.ts';
import { goldenSpectraAt } from '../models/golden-spectra.ts';
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
    method: 'get', path: '/batches/:batch/spectrum-view', summary: "One spectrum raw and after the preprocessing of the model that judged the batch, each with the golden band at the spectrum's progress (reference batches' spectra there: mean ± k sd between batches)", role: 'viewer',
    response: 'SpectrumView', params: z.object({ batch: idSchema }), query: z.object({ seq: z.coerce.number().int().min(0) }),
    handler: async ({ params, query }): Promise<SpectrumView> => {
      const b = await batch(params.batch);
      const s = await ctx.storage.getSpectrumBySeq(b.id, query.seq);
      if (!s) throw notFound(`batch ${b.id} has no spectrum with seq ${query.seq}`);
      const raw: SpectrumView['raw'] = { axis: Array.from(b.axis), values: Array.from(s.values), goldenMean: null, goldenLower: null, goldenUpper: null };
      if (!b.modelVersion) return { batch: b.id, seq: s.seq, t: s.t, raw, preprocessed: null, golden: { versionId: null, note: 'no model judged this batch' } };
      const { row, model: m } = await model(b.modelVersion);
      const out = m.chain.apply(s.values);
      const preprocessed: NonNullable<SpectrumView['preprocessed']> = { axis: Array.from(m.chain.outputAxis), values: Array.from(out), goldenMean: null, goldenLower: null, goldenUpper: null };
      const result = (await ctx.storage.readResults(b.id, s.seq, s.seq, 1))[0];
      if (!result) return { batch: b.id, seq: s.seq, t: s.t, raw, preprocessed, golden: { versionId: row.id, note: 'this spectrum has no stored result, so its progress is unknown' } };
      const g = await goldenSpectraAt(ctx, row, m, result.progress);
      if (typeof g === 'string') return { batch: b.id, seq: s.seq, t: s.t, raw, preprocessed, golden: { versionId: row.id, note: g } };
      Object.assign(raw, { goldenMean: g.raw.mean, goldenLower: g.raw.lower, goldenUpper: g.raw.upper });
      Object.assign(preprocessed, { goldenMean: g.preprocessed.mean, goldenLower: g.preprocessed.lower, goldenUpper: g.preprocessed.upper });
      const { raw: _r, preprocessed: _p, ...how } = g;
      return { batch: b.id, seq: s.seq, t: s.t, raw, preprocessed, golden: { versionId: row.id, progress: result.progress, ...how } };
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
