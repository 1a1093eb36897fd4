/** REST: server info, units, analyzers, deployments, alarms. */
import { z } from 'zod';
import type { Alarm, CreateAnalyzerResponse, DeployResult, Page, ServerInfo, UnitSummary } from '../../core/api/rest.ts';
import { deployPreview } from '../models/deploy-check.ts';
import { API_VERSION } from '../../core/api/rest.ts';
import { LIVE_PROTOCOL_VERSION } from '../../core/api/live.ts';
import { PROTOCOL_VERSION } from '../../core/protocol/ingest-messages.ts';
import type { ServerContext } from '../context.ts';
import { AlarmRequestError } from '../ingest/pipeline.ts';
import { randomUUID } from 'node:crypto';
import { HttpProblem, conflict, notFound } from './problem.ts';
import type { RouteTable } from './route-table.ts';
import { analyzerSummary, deploymentView } from './views.ts';
import { recordAudit, userOf } from './audit-helper.ts';
import { DEFAULT_ALARM_SETTINGS } from '../../core/alarms/types.ts';
import { nameSchema } from '../../core/io/names.ts';
import { alarmName, alarmStateName } from '../../core/vocabulary/plain-names.ts';
import { SignatureError } from '../auth/types.ts';

/** The longest shelve an operator may ask for (core/alarms default: 8 h, one shift). */
const MAX_SHELVE_MIN = DEFAULT_ALARM_SETTINGS.maxShelveMs / 60_000;

export const ADVISORY =
  "Tideline advises. Endpoint signals and alarms must be used within the site's validated control strategy; interlocks and operating procedures decide, and a model must be validated under the site's quality system before it is used for release decisions.";

export const idSchema = z.string().min(1).max(128).regex(/^[A-Za-z0-9._:-]+$/, 'use letters, digits and . _ : - only');
export const pageQuery = {
  limit: z.coerce.number().int().min(1).max(1000).default(100),
  offset: z.coerce.number().int().min(0).default(0),
};
const boolQuery = z.enum(['true', 'false']).transform((v) => v === 'true');

export function addPlantRoutes(t: RouteTable, ctx: ServerContext, startedAt: number, version: string) {
  t.add({
    method: 'get', path: '/info', summary: 'Server version, protocol versions and the advisory notice', role: 'viewer', response: 'ServerInfo',
    handler: async (): Promise<ServerInfo> => ({
      name: 'tideline', version, apiVersion: API_VERSION, ingestProtocol: PROTOCOL_VERSION, liveProtocol: LIVE_PROTOCOL_VERSION,
      serverTime: ctx.now(), startedAt, advisory: ADVISORY, simulation: ctx.simulation ?? null,
    }),
  });

  t.add({
    method: 'get', path: '/units', summary: 'All units with their status now', role: 'viewer', response: 'Page<UnitSummary>',
    handler: async (): Promise<Page<UnitSummary>> => {
      await ctx.ingest.refreshUnits();
      const items = [...ctx.ingest.units.keys()].sort().map((u) => strip(ctx.ingest.unitStatus(u)!));
      return { items, total: items.length, limit: items.length, offset: 0 };
    },
  });
  t.add({
    method: 'get', path: '/units/:unit', summary: 'One unit with its status now', role: 'viewer', response: 'UnitSummary',
    params: z.object({ unit: idSchema }),
    handler: async ({ params }) => {
      if (!ctx.ingest.units.has(params.unit)) await ctx.ingest.refreshUnits();
      const s = ctx.ingest.unitStatus(params.unit);
      if (!s) throw notFound(`unit "${params.unit}" does not exist`);
      return strip(s);
    },
  });
  t.add({
    method: 'post', path: '/units', summary: 'Create a unit', role: 'administrator', response: 'UnitSummary', status: 201,
    body: z.object({ id: idSchema, name: nameSchema().optional(), kind: z.enum(['dryer', 'reactor', 'other']).default('other'), description: nameSchema({ max: 2000, multiline: true, empty: true }).default('') }).strict(),
    handler: async ({ body, req }) => {
      // A unit created by the command line beside the running server is in the database only.
      if (ctx.ingest.units.has(body.id) || (await ctx.ingest.refreshUnits()).includes(body.id)) throw conflict(`unit "${body.id}" already exists`);
      const row = { id: body.id, name: body.name ?? body.id, kind: body.kind, description: body.description, createdAt: ctx.now() };
      await ctx.storage.createUnit(row);
      ctx.ingest.addUnit(row);
      await recordAudit(ctx, { user: userOf(req), action: 'unit.create', object: `unit:${row.id}`, after: row });
      return strip(ctx.ingest.unitStatus(row.id)!);
    },
  });

  t.add({
    method: 'get', path: '/analyzers', summary: 'All analyzers, connected or not', role: 'viewer', response: 'Page<AnalyzerSummary>',
    handler: async () => {
      const rows = await ctx.storage.listAnalyzers();
      const items = await Promise.all(rows.map((a) => analyzerSummary(ctx.storage, ctx.ingest, a, remoteAddresses)));
      return { items, total: items.length, limit: items.length, offset: 0 };
    },
  });
  t.add({
    method: 'post', path: '/analyzers', summary: 'Register an analyzer and issue its token (shown once)', role: 'administrator', response: 'CreateAnalyzerResponse', status: 201,
    body: z.object({ id: idSchema, name: nameSchema().optional() }).strict(),
    handler: async ({ body, req }): Promise<CreateAnalyzerResponse> => {
      if (await ctx.storage.getAnalyzer(body.id)) throw conflict(`analyzer "${body.id}" already exists`);
      await ctx.storage.createAnalyzer({ id: body.id, name: body.name ?? body.id, createdAt: ctx.now() });
      const { token } = await ctx.auth.createAnalyzerToken(body.id, '(issued with the analyzer)', userOf(req));
      await recordAudit(ctx, { user: userOf(req), action: 'analyzer.create', object: `analyzer:${body.id}`, after: { id: body.id, name: body.name ?? body.id } });
      const a = (await ctx.storage.getAnalyzer(body.id))!;
      return { analyzer: await analyzerSummary(ctx.storage, ctx.ingest, a, remoteAddresses), token };
    },
  });

  t.add({
    method: 'get', path: '/deployments', summary: 'Model deployments to units', role: 'viewer', response: 'Page<Deployment>',
    query: z.object({ unit: idSchema.optional(), active: boolQuery.optional() }),
    handler: async ({ query }) => {
      const rows = await ctx.storage.listDeployments(query);
      const items = await Promise.all(rows.map((d) => deploymentView(ctx.storage, d)));
      return { items, total: items.length, limit: items.length, offset: 0 };
    },
  });
  const loadForDeploy = async (unit: string, versionId: string) => {
    if (!ctx.ingest.units.has(unit)) await ctx.ingest.refreshUnits();
    if (!ctx.ingest.units.has(unit)) throw notFound(`unit "${unit}" does not exist`);
    const m = await ctx.storage.getModelVersion(versionId);
    if (!m) throw notFound(`model version "${versionId}" does not exist`);
    return m;
  };
  t.add({
    method: 'get', path: '/deployments/preview',
    summary: 'Whether a version fits a unit (analyzer axis, product, unit kind) and what deploying it changes against the version deployed there now',
    role: 'viewer', response: 'DeployPreview',
    query: z.object({ unit: idSchema, versionId: z.string().min(1).max(128) }),
    handler: async ({ query }) => deployPreview(ctx, query.unit, await loadForDeploy(query.unit, query.versionId)),
  });
  t.add({
    method: 'post', path: '/deployments',
    summary: 'Deploy an approved model version to a unit (batches started afterwards use it). Refused (422 model-does-not-fit) when the version cannot judge the unit (analyzer axis, product, unit kind). When it drops the endpoint property, property model or endpoint rule of the version it replaces, the deployment is an electronic signature (meaning "deployed"): confirmEndpointLoss (the reason for dropping it) and password are required (422 endpoint-would-be-lost naming the missing field), and the reason is signed as the signature\'s override with the comparison as its evidence. The answer and the audit entry carry the comparison.',
    role: 'model-owner',
    response: 'DeployResult', status: 201,
    body: z.object({
      unit: idSchema, versionId: z.string().min(1).max(128), reason: nameSchema({ max: 2000, multiline: true, empty: true }).optional(),
      confirmEndpointLoss: z.string().trim().min(1, 'give the reason for dropping the endpoint property').pipe(nameSchema({ max: 2000, multiline: true })).optional(),
      password: z.string().max(1024).optional(),
    }).strict(),
    handler: async ({ body, req }): Promise<DeployResult> => {
      const m = await loadForDeploy(body.unit, body.versionId);
      if (m.status !== 'approved') throw conflict(`model version ${m.name} v${m.version} is ${m.status}; only an approved version can be deployed`);
      const preview = await deployPreview(ctx, body.unit, m);
      if (preview.mismatches.length) {
        throw new HttpProblem(422, 'Model does not fit the unit', `${m.name} v${m.version} cannot judge the batches of ${body.unit}: ${preview.mismatches.map((x) => x.text).join('; ')}. Nothing was deployed.`, 'model-does-not-fit', preview.mismatches.map((x) => ({ path: 'versionId', message: x.text })));
      }
      const loss = preview.comparison.dropsEndpointProperty;
      const signed = loss && !!ctx.auth && !!req.user;
      if (loss && (body.confirmEndpointLoss === undefined || (signed && !body.password))) {
        const errors = [
          ...(body.confirmEndpointLoss === undefined ? [{ path: 'confirmEndpointLoss', message: 'required: this deployment drops the endpoint property; say why' }] : []),
          ...(signed && !body.password ? [{ path: 'password', message: 'required: dropping the endpoint property is signed; re-enter your password' }] : []),
        ];
        throw new HttpProblem(422, 'Endpoint property would be lost', `${preview.comparison.warnings[0] ?? 'the endpoint property would be lost'} Deploy with confirmEndpointLoss giving your reason${signed ? ' and your password: the reason is signed with the deployment (electronic signature) and kept in the audit trail' : ' (kept in the audit trail)'}, or choose a version that keeps it. Nothing was deployed.`, 'endpoint-would-be-lost', errors);
      }
      const before = ctx.ingest.deploymentRef(body.unit);
      const by = userOf(req);
      const d = { id: randomUUID(), unit: body.unit, modelVersion: m.id, deployedAt: ctx.now(), deployedBy: by, reason: body.reason ?? null, endedAt: null };
      let signature: { auditSeq: number; signedAt: string } | null = null;
      if (signed) {
        // The reason for dropping the endpoint is signed (the signature's override, bound to the
        // model's hash) with the comparison as evidence; the deployment is written in the
        // signature's unit of work, so a refused signature deploys nothing.
        try {
          const r = await ctx.auth!.sign({
            user: req.user!, password: body.password!, meaning: 'deployed', objectType: 'model', objectId: m.id, objectHash: m.sha256,
            reason: body.reason || `deployed to ${body.unit}, dropping the endpoint property`, override: body.confirmEndpointLoss!,
            evidence: { unit: body.unit, before, endpointLoss: { reason: body.confirmEndpointLoss, warnings: preview.comparison.warnings }, comparison: preview.comparison },
            address: req.ip,
          }, async (_sig, uow) => uow.models.deploy(d));
          signature = { auditSeq: r.signature.auditSeq, signedAt: r.signature.signedAt };
        } catch (e) {
          if (e instanceof SignatureError) throw new HttpProblem(e.status, 'Signature refused', `${e.message}. Nothing was deployed.`, 'signature-refused', [{ path: 'password', message: e.message }]);
          throw e;
        }
      } else {
        await ctx.storage.deploy(d);
      }
      await ctx.ingest.refreshDeployment(body.unit);
      await recordAudit(ctx, {
        user: by, action: 'model.deploy', object: `unit:${body.unit}`, before,
        after: {
          versionId: m.id, name: m.name, version: m.version, sha256: m.sha256, comparison: preview.comparison,
          ...(body.confirmEndpointLoss !== undefined && loss ? { confirmEndpointLoss: body.confirmEndpointLoss } : {}),
          ...(signature ? { signature: { meaning: 'deployed', auditSeq: signature.auditSeq, signedAt: signature.signedAt } } : {}),
        },
        reason: loss && body.confirmEndpointLoss !== undefined ? `${body.reason ? `${body.reason}; ` : ''}endpoint property dropped: ${body.confirmEndpointLoss}` : body.reason ?? null,
      });
      return { ...(await deploymentView(ctx.storage, d)), comparison: preview.comparison };
    },
  });

  t.add({
    method: 'get', path: '/alarms', summary: 'Alarms, newest change first', role: 'viewer', response: 'Page<Alarm>',
    query: z.object({
      unit: idSchema.optional(), batch: idSchema.optional(),
      state: z.enum(['normal', 'active-unacknowledged', 'active-acknowledged', 'cleared-unacknowledged']).optional(),
      active: boolQuery.optional(), open: boolQuery.optional(), ...pageQuery,
    }),
    handler: async ({ query }) => {
      const r = await ctx.storage.listAlarms(query);
      return { items: ctx.ingest.withActivity(r.items), total: r.total, limit: query.limit, offset: query.offset } satisfies Page<Alarm>;
    },
  });
  const alarmParams = z.object({ alarm: z.string().uuid('alarm ids are UUIDs') });
  const wrap = async (f: () => Promise<Alarm>) => {
    try {
      return await f();
    } catch (e) {
      if (e instanceof AlarmRequestError) throw new HttpProblem(e.status, e.status === 404 ? 'Not found' : 'Conflict', e.message);
      throw e;
    }
  };
  t.add({
    method: 'post', path: '/alarms/:alarm/acknowledge', summary: 'Acknowledge an alarm (ISA-18.2)', role: 'operator', response: 'Alarm',
    params: alarmParams, body: z.object({ comment: nameSchema({ max: 2000, multiline: true, empty: true }).optional() }).strict(),
    handler: async ({ params, body, req }) => {
      const before = await ctx.storage.getAlarm(params.alarm);
      const a = await wrap(() => ctx.ingest.acknowledgeAlarm(params.alarm, userOf(req), body.comment ?? null));
      await recordAudit(ctx, { user: userOf(req), action: 'alarm.acknowledge', object: `alarm:${a.id}`, before: before?.state, after: a.state, reason: body.comment ?? null });
      return a;
    },
  });
  t.add({
    method: 'post', path: '/alarms/acknowledge',
    summary: 'Acknowledge a group of alarms in one action (e.g. an ended batch\'s alarms): each alarm moves through its own life cycle (ISA-18.2); the action is one audit entry listing them. Refused (409, nothing acknowledged) when one of them has nothing to acknowledge',
    role: 'operator', response: 'AlarmGroupAcknowledgement',
    body: z.object({
      alarms: z.array(z.string().uuid('alarm ids are UUIDs')).min(1, 'name at least one alarm').max(500, 'at most 500 alarms in one acknowledgement')
        .refine((a) => new Set(a).size === a.length, 'an alarm is named twice'),
      comment: nameSchema({ max: 2000, multiline: true, empty: true }).optional(),
    }).strict(),
    handler: async ({ body, req }) => {
      const user = userOf(req);
      // Check them all first: a group is acknowledged whole or not at all.
      const before: Alarm[] = [];
      const problems: { path: string; message: string }[] = [];
      for (const [i, id] of body.alarms.entries()) {
        const a = await ctx.storage.getAlarm(id);
        if (!a) problems.push({ path: `alarms/${i}`, message: `alarm ${id} does not exist` });
        else if (a.state !== 'active-unacknowledged' && a.state !== 'cleared-unacknowledged') problems.push({ path: `alarms/${i}`, message: `alarm ${id} (${alarmName(a.key)}) is ${alarmStateName(a.state)}: there is nothing to acknowledge` });
        else before.push(a);
      }
      if (problems.length) throw new HttpProblem(409, 'Conflict', `${problems.length} of the ${body.alarms.length} alarms cannot be acknowledged (${problems.map((x) => x.message).join('; ')}); none was acknowledged.`, 'nothing-to-acknowledge', problems);
      const units = new Set(before.map((a) => a.unit));
      if (units.size > 1) throw new HttpProblem(422, 'Unprocessable', `the alarms belong to ${units.size} units (${[...units].join(', ')}); acknowledge one unit's alarms at a time`, 'alarms-of-several-units', [{ path: 'alarms', message: 'alarms of more than one unit' }]);
      const after: Alarm[] = [];
      for (const a of before) after.push(await wrap(() => ctx.ingest.acknowledgeAlarm(a.id, user, body.comment ?? null)));
      const batches = [...new Set(before.map((a) => a.batch))];
      const unit = before[0]!.unit;
      await recordAudit(ctx, {
        user, action: 'alarm.acknowledge-group',
        object: batches.length === 1 && batches[0] !== null ? `batch:${batches[0]}` : `unit:${unit}`,
        after: {
          count: after.length, unit, batches,
          alarms: after.map((a, i) => ({ id: a.id, name: alarmName(a.key), priority: a.priority, batch: a.batch, from: before[i]!.state, to: a.state })),
        },
        reason: body.comment ?? null,
      });
      return { acknowledged: after.length, alarms: after };
    },
  });
  t.add({
    method: 'post', path: '/alarms/:alarm/shelve', summary: 'Shelve an alarm for a while, with a reason (ISA-18.2 shelving)', role: 'operator', response: 'Alarm',
    params: alarmParams,
    body: z.object({ minutes: z.number().int().min(1, 'shelve for at least 1 minute').max(MAX_SHELVE_MIN, `shelve for at most ${MAX_SHELVE_MIN} minutes (one shift)`), reason: z.string().trim().min(1, 'give a reason').pipe(nameSchema({ max: 2000, multiline: true })) }).strict(),
    handler: async ({ params, body, req }) => {
      const a = await wrap(() => ctx.ingest.shelveAlarm(params.alarm, userOf(req), body.minutes, body.reason));
      await recordAudit(ctx, { user: userOf(req), action: 'alarm.shelve', object: `alarm:${a.id}`, after: { shelvedUntil: a.shelvedUntil }, reason: body.reason });
      return a;
    },
  });
  t.add({
    method: 'post', path: '/alarms/:alarm/unshelve', summary: 'End the shelving of an alarm now', role: 'operator', response: 'Alarm',
    params: alarmParams,
    handler: async ({ params, req }) => {
      const a = await wrap(() => ctx.ingest.unshelveAlarm(params.alarm, userOf(req)));
      await recordAudit(ctx, { user: userOf(req), action: 'alarm.unshelve', object: `alarm:${a.id}` });
      return a;
    },
  });
}

/** Connected analyzers' remote addresses (filled by the ingest upgrade handler). */
export const remoteAddresses = new Map<string, string>();

function strip(s: UnitSummary & { latest?: unknown }): UnitSummary {
  const { latest: _l, ...rest } = s;
  return rest;
}
