/**
 * REST: shadow runs (start, stop, list, comparison, promote with an electronic signature) and the
 * health of a model version. docs/model-life.md.
 */
import { randomUUID } from 'node:crypto';
import { z } from 'zod';
import type { ModelHealth, ShadowComparison, ShadowRun, ShadowRunList } from '../../core/api/model-life.ts';
import type { DeployResult } from '../../core/api/rest.ts';
import { recordAudit, userOf } from '../api/audit-helper.ts';
import { conflict, HttpProblem, notFound } from '../api/problem.ts';
import type { RouteTable } from '../api/route-table.ts';
import { idSchema } from '../api/routes-plant.ts';
import { deploymentView } from '../api/views.ts';
import { SignatureError } from '../auth/types.ts';
import type { ServerContext } from '../context.ts';
import { deployPreview } from '../models/deploy-check.ts';
import type { UnitOfWork } from '../storage/repositories.ts';
import { modelLifeOf } from './service.ts';

const SOURCE = 'core/api/model-life.ts';
const runParams = z.object({ run: z.string().uuid('shadow run ids are UUIDs') });
const boolQuery = z.enum(['true', 'false']).transform((v) => v === 'true');

export function addModelLifeRoutes(t: RouteTable, ctx: ServerContext) {
  const life = modelLifeOf(ctx);
  const loadRun = async (id: string) => {
    const r = await life.store.getRun(id);
    if (!r) throw notFound(`shadow run "${id}" does not exist`);
    return r;
  };

  t.add({
    method: 'get', path: '/shadow-runs', summary: 'Shadow runs, newest first', role: 'viewer', response: 'ShadowRunList', responseSource: SOURCE,
    query: z.object({ unit: idSchema.optional(), versionId: z.string().min(1).max(128).optional(), active: boolQuery.optional() }),
    handler: async ({ query }): Promise<ShadowRunList> => {
      const items = await Promise.all((await life.store.listRuns(query)).map((r) => life.runView(r)));
      return { items, total: items.length, limit: items.length, offset: 0 };
    },
  });

  t.add({
    method: 'post', path: '/shadow-runs',
    summary: 'Start a shadow run: a draft or approved version judges the batches that start on the unit from now on, beside the deployed one; its results are stored apart, it never signals and raises no alarm. One active run per unit (409); a version that cannot judge the unit is refused (422 model-does-not-fit)',
    role: 'model-owner', response: 'ShadowRun', responseSource: SOURCE, status: 201,
    body: z.object({ unit: idSchema, versionId: z.string().min(1).max(128), reason: z.string().trim().min(1, 'give a reason').max(2000) }).strict(),
    handler: async ({ body, req }): Promise<ShadowRun> => {
      if (!ctx.ingest.units.has(body.unit)) throw notFound(`unit "${body.unit}" does not exist`);
      const m = await ctx.storage.getModelVersion(body.versionId);
      if (!m) throw notFound(`model version "${body.versionId}" does not exist`);
      if (m.status === 'retired') throw conflict(`model version ${m.name} v${m.version} is retired; only a draft or approved version can run in shadow`);
      const deployed = ctx.ingest.deploymentRef(body.unit);
      if (deployed?.versionId === m.id) throw conflict(`model version ${m.name} v${m.version} is the one deployed on ${body.unit}; a shadow run compares another version with it`);
      const active = await life.store.activeRun(body.unit);
      if (active) throw conflict(`unit ${body.unit} already has shadow run ${active.id} (version ${active.modelVersion}); stop it first`);
      const preview = await deployPreview(ctx, body.unit, m);
      if (preview.mismatches.length) {
        throw new HttpProblem(422, 'Model does not fit the unit', `${m.name} v${m.version} cannot judge the batches of ${body.unit}: ${preview.mismatches.map((x) => x.text).join('; ')}. No shadow run was started.`, 'model-does-not-fit', preview.mismatches.map((x) => ({ path: 'versionId', message: x.text })));
      }
      const row = { id: randomUUID(), unit: body.unit, modelVersion: m.id, deployedVersion: deployed?.versionId ?? null, startedAt: ctx.now(), startedBy: userOf(req), reason: body.reason, endedAt: null, endedBy: null, endReason: null };
      await ctx.ingest.loadModel(m.id);
      await life.store.insertRun(row);
      ctx.ingest.setShadowRun(body.unit, { id: row.id, versionId: m.id });
      await recordAudit(ctx, { user: userOf(req), action: 'shadow.start', object: `unit:${body.unit}`, after: { run: row.id, versionId: m.id, name: m.name, version: m.version, sha256: m.sha256, deployed: deployed ?? null }, reason: body.reason });
      return life.runView(row);
    },
  });

  t.add({
    method: 'post', path: '/shadow-runs/:run/stop', summary: 'Stop a shadow run (its stored results and comparison stay)', role: 'model-owner', response: 'ShadowRun', responseSource: SOURCE,
    params: runParams, body: z.object({ reason: z.string().trim().min(1, 'give a reason').max(2000) }).strict(),
    handler: async ({ params, body, req }): Promise<ShadowRun> => {
      const r = await loadRun(params.run);
      if (!(await life.store.endRun(r.id, ctx.now(), userOf(req), body.reason))) throw conflict(`shadow run ${r.id} has ended already`);
      if (ctx.ingest.shadowRun(r.unit)?.id === r.id) ctx.ingest.setShadowRun(r.unit, null);
      await recordAudit(ctx, { user: userOf(req), action: 'shadow.stop', object: `unit:${r.unit}`, after: { run: r.id, versionId: r.modelVersion }, reason: body.reason });
      return life.runView((await life.store.getRun(r.id))!);
    },
  });

  t.add({
    method: 'get', path: '/shadow-runs/:run/comparison',
    summary: "The candidate against the deployed version on every ended batch of the run: confirmed alarms per batch, conditions caught by one and not the other, endpoint calls and their difference, and each version's prediction against the lab values",
    role: 'viewer', response: 'ShadowComparison', responseSource: SOURCE, params: runParams,
    handler: async ({ params }): Promise<ShadowComparison> => life.comparison(await loadRun(params.run)),
  });

  t.add({
    method: 'post', path: '/shadow-runs/:run/promote',
    summary: "Promote the run's candidate: deploy it on the unit with an electronic signature (meaning 'deployed'; password and reason), the comparison attached to the signature and the audit record; the run ends. The version must be approved; the deployment checks of POST /api/deployments apply (422 model-does-not-fit, endpoint-would-be-lost)",
    role: 'model-owner', response: 'DeployResult',
    params: runParams,
    body: z.object({ reason: z.string().trim().min(1, 'give a reason').max(2000), password: z.string().max(1024).optional(), confirmEndpointLoss: z.string().trim().min(1, 'give the reason for dropping the endpoint property').max(2000).optional() }).strict(),
    handler: async ({ params, body, req }): Promise<DeployResult & { comparison: unknown; shadowComparison: ShadowComparison['summary'] }> => {
      const r = await loadRun(params.run);
      const m = await ctx.storage.getModelVersion(r.modelVersion);
      if (!m) throw notFound(`model version "${r.modelVersion}" does not exist`);
      if (m.status !== 'approved') throw conflict(`model version ${m.name} v${m.version} is ${m.status}; approve it (signed) before promoting it`);
      if (ctx.ingest.deploymentRef(r.unit)?.versionId === m.id) throw conflict(`model version ${m.name} v${m.version} is already deployed on ${r.unit}`);
      const preview = await deployPreview(ctx, r.unit, m);
      if (preview.mismatches.length) {
        throw new HttpProblem(422, 'Model does not fit the unit', `${m.name} v${m.version} cannot judge the batches of ${r.unit}: ${preview.mismatches.map((x) => x.text).join('; ')}. Nothing was deployed.`, 'model-does-not-fit', preview.mismatches.map((x) => ({ path: 'versionId', message: x.text })));
      }
      if (preview.comparison.dropsEndpointProperty && body.confirmEndpointLoss === undefined) {
        throw new HttpProblem(422, 'Endpoint property would be lost', `${preview.comparison.warnings[0] ?? 'the endpoint property would be lost'} Promote with confirmEndpointLoss giving your reason. Nothing was deployed.`, 'endpoint-would-be-lost', [{ path: 'confirmEndpointLoss', message: 'required: this deployment drops the endpoint property' }]);
      }
      const cmp = await life.comparison(r);
      const evidence = { shadowRun: r.id, batches: cmp.summary.batches, deployedAlarmsPerBatch: cmp.summary.deployedAlarmsPerBatch, candidateAlarmsPerBatch: cmp.summary.candidateAlarmsPerBatch, batchesOnlyDeployed: cmp.summary.batchesOnlyDeployed, batchesOnlyCandidate: cmp.summary.batchesOnlyCandidate, endpointMeanDifferenceMin: cmp.summary.endpointMeanDifferenceMin, labDeployed: cmp.summary.labDeployed, labCandidate: cmp.summary.labCandidate, text: cmp.summary.text };
      const before = ctx.ingest.deploymentRef(r.unit);
      const by = userOf(req);
      const at = ctx.now();
      const d = { id: randomUUID(), unit: r.unit, modelVersion: m.id, deployedAt: at, deployedBy: by, reason: body.reason, endedAt: null };
      // In the signature's unit of work, so a refusal rolls the signature back with the deployment.
      const apply = async (_sig: unknown, uow: UnitOfWork) => {
        if (!uow.modelLife) throw new Error('this storage backend keeps no shadow runs');
        await uow.models.deploy(d);
        if (!(await uow.modelLife.endRun(r.id, at, by, `promoted: ${body.reason}`))) throw conflict(`shadow run ${r.id} has ended already; nothing was signed or deployed`);
      };
      if (ctx.auth && req.user) {
        try {
          // A dropped endpoint property is signed too: its reason as the signature's override, the comparison as evidence.
          const loss = preview.comparison.dropsEndpointProperty && body.confirmEndpointLoss !== undefined ? body.confirmEndpointLoss : undefined;
          await ctx.auth.sign({
            user: req.user, password: body.password ?? '', meaning: 'deployed', objectType: 'model', objectId: m.id, objectHash: m.sha256, reason: body.reason,
            ...(loss !== undefined ? { override: loss } : {}),
            evidence: { unit: r.unit, before, shadowComparison: evidence, ...(loss !== undefined ? { endpointLoss: { reason: loss, warnings: preview.comparison.warnings }, comparison: preview.comparison } : {}) },
            address: req.ip,
          }, apply);
        } catch (e) {
          if (e instanceof SignatureError) throw new HttpProblem(e.status, 'Signature refused', e.message, 'signature-refused');
          throw e;
        }
      } else {
        await ctx.storage.unitOfWork((uow) => apply(null, uow));
      }
      ctx.ingest.setShadowRun(r.unit, null);
      await ctx.ingest.refreshDeployment(r.unit);
      await recordAudit(ctx, {
        user: by, action: 'model.deploy', object: `unit:${r.unit}`, before,
        after: { versionId: m.id, name: m.name, version: m.version, sha256: m.sha256, comparison: preview.comparison, shadowComparison: evidence, ...(body.confirmEndpointLoss !== undefined ? { confirmEndpointLoss: body.confirmEndpointLoss } : {}) },
        reason: body.reason,
      });
      void life.refreshUnit(r.unit);
      return { ...(await deploymentView(ctx.storage, d)), comparison: preview.comparison, shadowComparison: cmp.summary };
    },
  });

  t.add({
    method: 'get', path: '/models/versions/:version/health',
    summary: "Health of a version over the batches it judged: confirmed alarms per batch against approval, shares beyond the drawn T² and Q limits against nominal (exact binomial test, Clopper–Pearson interval), EWMA drift of batch-mean scores, property bias against lab values, periodic-review due date",
    role: 'viewer', response: 'ModelHealth', responseSource: SOURCE,
    params: z.object({ version: z.string().min(1).max(128) }),
    handler: async ({ params }): Promise<ModelHealth> => {
      const row = await ctx.storage.getModelVersion(params.version);
      if (!row) throw notFound(`model version "${params.version}" does not exist`);
      return life.health(row);
    },
  });
}
