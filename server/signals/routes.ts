/**
 * REST routes of the signal side, under /api/signals:
 *
 * | method | path                                            | role          | returns |
 * | ------ | ----------------------------------------------- | ------------- | ------- |
 * | GET    | /api/signals                                    | viewer        | channels, their cursors and pending events per unit |
 * | GET    | /api/signals/dead-letters?channel=&unit=&limit=&offset= | viewer | events a channel gave up on after its maximum attempts |
 * | POST   | /api/signals/dead-letters/:channel/:event/requeue | administrator | try the event again (sent after its successors) |
 * | POST   | /api/signals/endpoint/:unit/acknowledge         | operator      | reset the OPC UA "endpoint reached" latch (when the DCS cannot) |
 *
 * The routes are in the server's route table (server/api/route-table.ts): validated by the zod
 * schemas below and listed in /api/openapi.json.
 *
 * Tideline advises; the site's validated control strategy, interlocks and procedures decide what a
 * signal may do.
 */
import { z } from 'zod';
import { conflict, notFound } from '../api/problem.ts';
import type { RouteTable } from '../api/route-table.ts';
import { idSchema } from '../api/routes-plant.ts';
import type { ServerContext } from '../context.ts';
import type { SignalDispatcher } from './dispatcher.ts';
import type { OpcuaChannel } from './opcua/opcua-channel.ts';
import type { SignalRepository } from './outbox-store.ts';

export const SIGNALS_CAUTION =
  "Tideline advises. Endpoint signals and alarms must be used within the site's validated control strategy; interlocks and operating procedures decide what a signal may do.";

/** Answer of GET /api/signals. */
export interface SignalsStatus {
  caution: string;
  channels: {
    name: string;
    ready: boolean;
    maxAttempts: number | null;
    delivered: number;
    failed: number;
    dead: number;
    units: {
      unit: string;
      deliveredSeq: number;
      pending: number;
      retrying: { eventId: string; seq: number; attempts: number; nextAt: number; lastError: string | null } | null;
    }[];
  }[];
  opcua: { endpointUrl: string; pkiDir: string } | null;
}

/** Answer of GET /api/signals/dead-letters. */
export interface DeadLetterPage {
  items: {
    channel: string;
    eventId: string;
    unit: string;
    seq: number;
    type: string;
    attempts: number;
    lastError: string | null;
    deadAt: number;
    requeuedAt: number | null;
    deliveredAt: number | null;
  }[];
  limit: number;
  offset: number;
}

/** Answer of POST /api/signals/dead-letters/:channel/:event/requeue. */
export interface RequeueResult {
  channel: string;
  eventId: string;
  requeuedAt: number | null;
}

/** Answer of POST /api/signals/endpoint/:unit/acknowledge. */
export interface EndpointAcknowledgeResult {
  unit: string;
  latch: ReturnType<OpcuaChannel['latch']>;
}

const deadLetterQuery = z.object({
  channel: z.string().min(1).max(200).optional(),
  unit: idSchema.optional(),
  limit: z.coerce.number().int('limit must be an integer 1…1000').min(1, 'limit must be an integer 1…1000').max(1000, 'limit must be an integer 1…1000').default(100),
  offset: z.coerce.number().int('offset must be an integer ≥ 0').min(0, 'offset must be an integer ≥ 0').default(0),
});
const requeueParams = z.object({ channel: z.string().min(1).max(200), event: z.string().min(1).max(200) });
const requeueBody = z.object({ reason: z.string().max(2000).optional() });
const SOURCE = 'server/signals/routes.ts';

export function addSignalRoutes(t: RouteTable, ctx: ServerContext, store: SignalRepository, dispatchers: SignalDispatcher[], opcua: OpcuaChannel | null): void {
  t.add({
    method: 'get', path: '/signals', summary: 'Signal channels, their cursors and pending events per unit', role: 'viewer', response: 'SignalsStatus', responseSource: SOURCE,
    handler: async (): Promise<SignalsStatus> => {
      const units = await store.units();
      const channels = await Promise.all(
        dispatchers.map(async (d) => ({
          name: d.channel.name,
          ready: d.channel.isReady ? d.channel.isReady() : true,
          maxAttempts: Number.isFinite(d.channel.maxAttempts) ? d.channel.maxAttempts : null,
          delivered: d.stats.delivered,
          failed: d.stats.failed,
          dead: d.stats.dead,
          units: await Promise.all(
            units.map(async (unit) => {
              const pending = await store.pending(d.channel.name, unit, 1000);
              const head = pending[0] ? await store.attempt(d.channel.name, pending[0].id) : null;
              return {
                unit,
                deliveredSeq: await store.cursor(d.channel.name, unit),
                pending: pending.length,
                retrying: head ? { eventId: head.event_id, seq: head.unit_seq, attempts: head.attempts, nextAt: head.next_at, lastError: head.last_error } : null,
              };
            }),
          ),
        })),
      );
      return {
        caution: SIGNALS_CAUTION,
        channels,
        opcua: opcua ? { endpointUrl: opcua.endpointUrl, pkiDir: opcua.pkiDir } : null,
      };
    },
  });

  t.add({
    method: 'get', path: '/signals/dead-letters', summary: 'Events a channel gave up on after its maximum attempts', role: 'viewer',
    query: deadLetterQuery, response: 'DeadLetterPage', responseSource: SOURCE,
    handler: async ({ query }): Promise<DeadLetterPage> => {
      const items = (await store.deadLetters({ channel: query.channel, unit: query.unit, limit: query.limit, offset: query.offset })).map((d) => ({
        channel: d.channel,
        eventId: d.event_id,
        unit: d.unit,
        seq: d.unit_seq,
        type: d.type,
        attempts: d.attempts,
        lastError: d.last_error,
        deadAt: d.dead_at,
        requeuedAt: d.requeued_at,
        deliveredAt: d.delivered_at,
      }));
      return { items, limit: query.limit, offset: query.offset };
    },
  });

  t.add({
    method: 'post', path: '/signals/dead-letters/:channel/:event/requeue', summary: 'Try a dead-lettered event again (sent after its successors; audited)', role: 'administrator',
    params: requeueParams, body: requeueBody, bodyOptional: true, response: 'RequeueResult', responseSource: SOURCE,
    handler: async ({ params: { channel, event }, body, req }): Promise<RequeueResult> => {
      const before = await store.deadLetter(channel, event);
      if (!before) throw notFound(`no dead letter ${event} on channel ${channel}`);
      await store.requeue(channel, event, ctx.now());
      await ctx.audit?.record({ user: req.user ?? 'system', action: 'signal.requeue', object: `signal:${channel}/${event}`, before, reason: body?.reason ?? null });
      for (const d of dispatchers) d.wake();
      return { channel, eventId: event, requeuedAt: (await store.deadLetter(channel, event))?.requeued_at ?? null };
    },
  });

  t.add({
    method: 'post', path: '/signals/endpoint/:unit/acknowledge', summary: 'Reset the OPC UA "endpoint reached" latch (when the DCS cannot)', role: 'operator',
    params: z.object({ unit: idSchema }), response: 'EndpointAcknowledgeResult', responseSource: SOURCE,
    handler: async ({ params: { unit }, req }): Promise<EndpointAcknowledgeResult> => {
      if (!opcua) throw conflict('the OPC UA channel is not configured: there is no endpoint latch');
      const by = req.user?.name ?? 'api';
      if (!(await opcua.acknowledgeEndpoint(unit, by))) throw conflict(`unit ${unit} has no latched endpoint to acknowledge`);
      return { unit, latch: opcua.latch(unit) };
    },
  });
}
