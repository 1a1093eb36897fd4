/** REST: model versions — list, detail, envelope, build, evaluate, approve, retire. */
import { z } from 'zod';
import type { ModelSummary, Page } from '../../core/api/rest.ts';
import type { ServerContext } from '../context.ts';
import { SignatureError, type AuthUser } from '../auth/types.ts';
import type { Request } from 'express';
import { buildFromStored, envelopeView, evaluateVersion, latestApprovalEvidence, referencesView, versionDetail } from '../models/model-service.ts';
import { HttpProblem, conflict, notFound, requestProblem } from './problem.ts';
import type { RouteTable } from './route-table.ts';
import { modelVersionSummary } from './views.ts';
import { idSchema } from './routes-plant.ts';
import { nameSchema } from '../../core/io/names.ts';
import { recordAudit, userOf } from './audit-helper.ts';
import { parseMonitoringModel } from '../../core/model/monitoring-model.ts';
import { unknownBuildSettingKeys } from '../../core/model/build-settings.ts';
import { earlyBatchesText } from '../../core/model/endpoint-check.ts';
import { transferAuditAfter, transferVersion } from '../models/transfer-service.ts';
import { historyJob, startHistoryJob } from '../models/history-jobs.ts';
import { transferBlockingWarning } from '../../core/calibration-transfer/transfer-model.ts';
import { DEFAULT_REVIEW_DAYS, modelLifeOf } from '../model-life/service.ts';

const versionParams = z.object({ version: z.string().min(1).max(128) });

async function guard<T>(f: () => Promise<T>): Promise<T> {
  try {
    return await f();
  } catch (e) {
    if (e instanceof SignatureError) throw new HttpProblem(e.status, 'Signature refused', e.message, 'signature-refused');
    throw e;
  }
}

export function addModelRoutes(t: RouteTable, ctx: ServerContext) {
  const load = async (id: string) => {
    const m = await ctx.storage.getModelVersion(id);
    if (!m) throw notFound(`model version "${id}" does not exist`);
    return m;
  };
  t.add({
    method: 'get', path: '/models', summary: 'Models with all their versions', role: 'viewer', response: 'Page<ModelSummary>',
    handler: async (): Promise<Page<ModelSummary>> => {
      const rows = await ctx.storage.listModelVersions();
      const by = new Map<string, ModelSummary>();
      for (const r of rows) {
        const m = by.get(r.name) ?? { name: r.name, product: r.product, versions: [] };
        m.versions.push(await modelVersionSummary(ctx.storage, r));
        by.set(r.name, m);
      }
      const items = [...by.values()];
      return { items, total: items.length, limit: items.length, offset: 0 };
    },
  });
  t.add({
    method: 'get', path: '/models/versions/:version', summary: 'One model version with its evidence', role: 'viewer', response: 'ModelVersionDetail',
    params: versionParams, handler: async ({ params }) => guard(async () => versionDetail(ctx, await load(params.version))),
  });
  t.add({
    method: 'get', path: '/models/versions/:version/envelope', summary: 'The golden envelope of a model version, ready to draw', role: 'viewer', response: 'ModelEnvelopeView',
    params: versionParams, handler: async ({ params }) => guard(async () => envelopeView(ctx, await load(params.version))),
  });
  t.add({
    method: 'get', path: '/models/versions/:version/references', summary: "The reference batches' paths on the version's progress axis (replayed once per version, then kept), for drawing", role: 'viewer', response: 'ModelReferencesView',
    params: versionParams, handler: async ({ params }) => guard(async () => referencesView(ctx, await load(params.version))),
  });
  t.add({
    method: 'post', path: '/models/build', summary: 'Build a draft model version from ended reference batches and settings (computed in a worker thread; answered when done; 409 while another build runs)', role: 'model-owner',
    response: 'ModelVersionSummary', status: 201,
    body: z.object({
      name: idSchema, product: nameSchema({ max: 128 }),
      referenceBatches: z.array(idSchema).min(2, 'choose at least 2 reference batches').max(200),
      settings: z.record(z.string(), z.unknown()).optional(),
    }).strict(),
    handler: async ({ body, req }) =>
      guard(async () => {
        if (new Set(body.referenceBatches).size !== body.referenceBatches.length) throw requestProblem(400, 'a reference batch is listed twice');
        const unknown = unknownBuildSettingKeys(body.settings ?? {});
        if (unknown.length) {
          throw new HttpProblem(400, 'Unknown setting', `settings ${unknown.map((k) => `"${k}"`).join(', ')} ${unknown.length === 1 ? 'is not a build setting' : 'are not build settings'}: nothing was built (a misspelt setting would build the model on the default; docs/model-building.md lists the settings)`, 'unknown-setting', unknown.map((k) => ({ path: `body.settings.${k}`, message: 'not a build setting' })));
        }
        const row = await buildFromStored(ctx, body, userOf(req));
        await recordAudit(ctx, { user: userOf(req), action: 'model.build', object: `model:${row.name}@${row.version}`, after: { id: row.id, sha256: row.sha256, referenceBatches: row.referenceBatches } });
        return modelVersionSummary(ctx.storage, row);
      }),
  });
  t.add({
    method: 'post', path: '/models/versions/:version/evaluate', summary: 'Replay chosen stored batches through a model version', role: 'model-owner', response: 'EvaluationResult',
    params: versionParams, body: z.object({ batches: z.array(idSchema).min(1).max(200), faulty: z.array(idSchema).max(200).optional() }).strict(),
    handler: async ({ params, body, req }) => guard(async () => evaluateVersion(ctx, (await load(params.version)).id, body.batches, userOf(req), body.faulty ?? [])),
  });
  t.add({
    method: 'get', path: '/models/versions/:version/approval-evidence',
    summary: "The approval evidence of a version: its latest evaluation on held-out good batches (point rates beyond the T² and Q limits against nominal with exact binomial intervals, worst batch, alarmed good batches, endpoint reached n of m, early endpoint calls) and its warnings; null when it has not been evaluated",
    role: 'viewer', response: 'ApprovalEvidence',
    params: versionParams, handler: async ({ params }) => guard(async () => latestApprovalEvidence(ctx, (await load(params.version)).id)),
  });
  t.add({
    method: 'post', path: '/models/history-pca',
    summary: 'Start a plant-history decomposition: the PCA of hundreds of stored reference batches streamed from the database by worker threads (memory bounded by the wavelengths, not the spectra), cross-validated by groups of batches; answered at once with the job, whose progress GET shows',
    role: 'model-owner', response: 'HistoryJobView', status: 202,
    body: z.object({
      referenceBatches: z.array(idSchema).min(2, 'choose at least 2 reference batches').max(5000),
      components: z.number().int().min(1).max(50),
      groups: z.number().int().min(0).max(50).optional(),
      chain: z.array(z.record(z.string(), z.unknown())).max(20).optional(),
    }).strict(),
    handler: async ({ body, req }) =>
      guard(async () => {
        const job = await startHistoryJob(ctx, body, userOf(req));
        await recordAudit(ctx, { user: userOf(req), action: 'model.history-pca', object: `history-pca:${job.job}`, after: { batches: body.referenceBatches.length, components: body.components, groups: job.groups } });
        return job;
      }),
  });
  t.add({
    method: 'get', path: '/models/history-pca/:job', summary: 'A plant-history decomposition: its progress while it runs (pass, batches read of all, spectra), its eigenvalues, explained variance and PRESS when done', role: 'viewer',
    response: 'HistoryJobView', params: z.object({ job: z.string().min(1).max(64) }),
    handler: async ({ params }) => {
      const j = historyJob(ctx, params.job);
      if (!j) throw notFound(`plant-history job "${params.job}" is not known to this server (jobs are kept while it runs)`);
      return j;
    },
  });
  const transferSet = z.object({ old: idSchema, new: idSchema }).strict();
  t.add({
    method: 'post', path: '/models/versions/:version/transfer',
    summary: "Carry a version over to a new analyzer: fit a DS or PDS calibration transfer on transfer sets (the same samples as a batch from the old analyzer and one from the new, row for row, imported like batches), judge it on held-out sets (T², Q and property error before and after), and store it as a new draft version whose model file carries the transform and the judgement under its hash",
    role: 'model-owner', response: 'ModelVersionSummary', status: 201, params: versionParams,
    body: z.object({
      method: z.enum(['ds', 'pds']),
      window: z.number().int().min(1).max(99).refine((w) => w % 2 === 1, 'the PDS window is an odd number of new-analyzer pixels').optional(),
      rcond: z.number().min(0).lt(1).optional(),
      maxRank: z.number().int().min(1).max(10000).optional(),
      fit: z.array(transferSet).min(1, 'give at least one transfer set to fit on').max(100),
      heldOut: z.array(transferSet).min(1, 'give at least one held-out transfer set: the transfer is judged on it before it may be approved').max(100),
    }).strict(),
    handler: async ({ params, body, req }) =>
      guard(async () => {
        const src = await load(params.version);
        const row = await transferVersion(ctx.storage, src, body, userOf(req), ctx.now());
        await recordAudit(ctx, { user: userOf(req), action: 'model.transfer', object: `model:${row.name}@${row.version}`, after: transferAuditAfter(row, src, body) });
        return modelVersionSummary(ctx.storage, row);
      }),
  });
  const signBody = z.object({ reason: z.string().trim().min(1, 'give a reason').pipe(nameSchema({ max: 2000, multiline: true })), password: z.string().max(1024).optional() }).strict();
  const approveBody = signBody.extend({
    earlyEndpointOverride: z.string().trim().min(1, 'give the reason for the override').pipe(nameSchema({ max: 2000, multiline: true })).optional(),
    evidenceOverride: z.string().trim().min(1, 'give the reason for approving against the evidence').pipe(nameSchema({ max: 2000, multiline: true })).optional(),
    reviewIntervalDays: z.number().int('whole days').min(1, 'at least 1 day').max(3650, 'at most 3650 days (10 years)').optional(),
  }).strict();
  t.add({
    method: 'post', path: '/models/versions/:version/approve',
    summary: 'Approve a draft version (electronic signature: password and reason). When the leave-one-batch-out endpoint check shows the rule reaching done early on a reference batch, approval needs earlyEndpointOverride (a reason, signed with the approval); without it 422',
    role: 'model-owner',
    response: 'ModelVersionSummary', params: versionParams, body: approveBody,
    handler: async ({ params, body, req }) =>
      guard(async () => {
        const m = await load(params.version);
        if (m.status !== 'draft') throw conflict(`model version ${m.name} v${m.version} is ${m.status}; only a draft can be approved`);
        const by = userOf(req);
        // The endpoint check stored in the (hashed) model: an early call on a reference batch needs a signed override.
        const check = parseMonitoringModel(m.body).meta.endpointCheck;
        const early = check !== undefined && check.early > 0;
        const override = body.earlyEndpointOverride;
        // The evidence on held-out good batches: a point rate far above nominal needs a signed override.
        const evidence = await latestApprovalEvidence(ctx, m.id);
        const transferWarning = transferBlockingWarning(parseMonitoringModel(m.body).transfer);
        const blocking = [...(evidence?.warnings.filter((w) => w.blocking) ?? []), ...(transferWarning ? [transferWarning] : [])];
        const evidenceOverride = body.evidenceOverride;
        if (early && override === undefined && blocking.length && evidenceOverride === undefined) {
          throw new HttpProblem(422, 'Approval needs two overrides', `approval of ${m.name} v${m.version} refused: ${earlyBatchesText(check!)}; and ${blocking.map((w) => w.text).join(' ')} Rebuild the version, or approve with earlyEndpointOverride and evidenceOverride giving your reasons (signed with the approval and kept in the audit trail)`, 'overrides-needed', [
            { path: 'earlyEndpointOverride', message: 'required: the endpoint rule reached done early on reference batches' },
            { path: 'evidenceOverride', message: 'required: the point rate on held-out good batches is far above nominal' },
          ]);
        }
        if (early && override === undefined) {
          throw new HttpProblem(422, 'Endpoint rule fires early', `approval of ${m.name} v${m.version} refused: ${earlyBatchesText(check!)}. Change the rule and rebuild, or approve with earlyEndpointOverride giving your reason (it is signed with the approval and kept in the audit trail)`, 'early-endpoint', [{ path: 'earlyEndpointOverride', message: 'required: the endpoint rule reached done early on reference batches' }]);
        }
        if (!early && override !== undefined) {
          throw new HttpProblem(422, 'Nothing to override', `earlyEndpointOverride given, but ${check ? 'the endpoint check shows no reference batch called early' : `model version ${m.name} v${m.version} carries no endpoint check`}; approve without it`, 'nothing-to-override', [{ path: 'earlyEndpointOverride', message: 'not needed' }]);
        }
        if (blocking.length && evidenceOverride === undefined) {
          throw new HttpProblem(422, 'Evidence far from the limits', `approval of ${m.name} v${m.version} refused: ${blocking.map((w) => w.text).join(' ')} Rebuild the version (components, preprocessing, reference batches), or approve with evidenceOverride giving your reason (it is signed with the approval and kept with the evidence in the audit trail)`, 'evidence-far-off', [{ path: 'evidenceOverride', message: 'required: the point rate on held-out good batches is far above nominal' }]);
        }
        if (!blocking.length && evidenceOverride !== undefined) {
          throw new HttpProblem(422, 'Nothing to override', `evidenceOverride given, but ${evidence ? 'the evidence on held-out good batches shows no rate far above nominal' : `model version ${m.name} v${m.version} has not been evaluated on held-out good batches`}; approve without it`, 'nothing-to-override', [{ path: 'evidenceOverride', message: 'not needed' }]);
        }
        const signedOverride = [override, evidenceOverride !== undefined ? `approval evidence: ${evidenceOverride}` : undefined].filter((x): x is string => x !== undefined).join(' · ') || undefined;
        const evidenceSummary = evidence
          ? { evaluationId: evidence.evaluationId, heldOutGood: evidence.heldOutGood.length, points: evidence.points, t2Rate: evidence.t2.rate, qRate: evidence.q.rate, nominalRate: evidence.nominalRate, endpointReached: `${evidence.endpoint.reached} of ${evidence.endpoint.of}`, warnings: evidence.warnings.map((w) => w.code) }
          : { evaluationId: null };
        // The periodic review (docs/model-life.md): due this many days after approval.
        const reviewDays = body.reviewIntervalDays ?? DEFAULT_REVIEW_DAYS;
        const at = ctx.now();
        const review = { intervalDays: reviewDays, dueAt: new Date(at + reviewDays * 86_400_000).toISOString() };
        await ctx.auth.sign({ user: signer(req), password: body.password ?? '', meaning: 'approved', objectType: 'model', objectId: m.id, objectHash: m.sha256, reason: body.reason, ...(signedOverride !== undefined ? { override: signedOverride } : {}), evidence: { ...evidenceSummary, review }, address: req.ip }, async (_sig, uow) => {
          // In the signature's unit of work: if the version is no longer a draft, the throw rolls the signature and its audit record back too.
          try {
            await uow.models.approve(m.id, by, at, body.reason);
          } catch {
            throw conflict(`model version ${m.name} v${m.version} stopped being a draft while it was being signed; nothing was signed or changed`);
          }
          await modelLifeOf(ctx).setReview(m.id, reviewDays, at, by, uow.modelLife);
        });
        return modelVersionSummary(ctx.storage, (await ctx.storage.getModelVersion(m.id))!);
      }),
  });
  t.add({
    method: 'post', path: '/models/versions/:version/retire', summary: 'Retire a version (ends its deployments; electronic signature)', role: 'model-owner',
    response: 'ModelVersionSummary', params: versionParams, body: signBody,
    handler: async ({ params, body, req }) =>
      guard(async () => {
        const m = await load(params.version);
        if (m.status === 'retired') throw conflict(`model version ${m.name} v${m.version} is already retired`);
        const units = (await ctx.storage.listDeployments({ active: true })).filter((d) => d.modelVersion === m.id).map((d) => d.unit);
        const by = userOf(req);
        await ctx.auth.sign({ user: signer(req), password: body.password ?? '', meaning: 'retired', objectType: 'model', objectId: m.id, objectHash: m.sha256, reason: body.reason, address: req.ip }, async (_sig, uow) => {
          try {
            await uow.models.retire(m.id, by, ctx.now(), body.reason);
          } catch {
            throw conflict(`model version ${m.name} v${m.version} was retired by someone else while it was being signed; nothing was signed or changed`);
          }
        });
        for (const u of units) await ctx.ingest.refreshDeployment(u);
        return modelVersionSummary(ctx.storage, (await ctx.storage.getModelVersion(m.id))!);
      }),
  });
}

/** The signing user: the route's role check has set it (there is no way to a signed change without a session). */
function signer(req: Request): AuthUser {
  if (!req.user) throw new HttpProblem(401, 'Login required', 'a signature needs a logged-in user: log in with POST /api/auth/login', 'login-required');
  return req.user;
}
