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
 * Tideline advises; the site's validated control strategy, interlocks and procedures decide what a
 * signal may do.
 */
import express, { type RequestHandler } from 'express';
import type { ServerContext } from '../context.ts';
import type { SignalDispatcher } from './dispatcher.ts';
import type { OpcuaChannel } from './opcua/opcua-channel.ts';
import type { OutboxStore } from './outbox-store.ts';

export const SIGNALS_CAUTION =
  "Tideline advises. Endpoint signals and alarms must be used within the site's validated control strategy; interlocks and operating procedures decide what a signal may do.";

function problem(res: express.Response, status: number, title: string, detail: string) {
  res.status(status).type('application/problem+json').json({ type: `/problems/${title.toLowerCase().replace(/\s+/g, '-')}`, title, status, detail });
}

export function signalRoutes(ctx: ServerContext, store: OutboxStore, dispatchers: SignalDispatcher[], opcua: OpcuaChannel | null): express.Router {
  const r = express.Router();
  const pass: RequestHandler = (_req, _res, next) => next();
  const role = (name: 'viewer' | 'operator' | 'administrator') => (ctx.auth ? ctx.auth.requireRole(name) : pass);

  r.get('/', role('viewer'), (_req, res) => {
    const units = store.units();
    res.json({
      caution: SIGNALS_CAUTION,
      channels: dispatchers.map((d) => ({
        name: d.channel.name,
        ready: d.channel.isReady ? d.channel.isReady() : true,
        maxAttempts: Number.isFinite(d.channel.maxAttempts) ? d.channel.maxAttempts : null,
        delivered: d.stats.delivered,
        failed: d.stats.failed,
        dead: d.stats.dead,
        units: units.map((unit) => {
          const pending = store.pending(d.channel.name, unit, 1000);
          const head = pending[0] ? store.attempt(d.channel.name, pending[0].id) : undefined;
          return {
            unit,
            deliveredSeq: store.cursor(d.channel.name, unit),
            pending: pending.length,
            retrying: head ? { eventId: head.event_id, seq: head.unit_seq, attempts: head.attempts, nextAt: head.next_at, lastError: head.last_error } : null,
          };
        }),
      })),
      opcua: opcua ? { endpointUrl: opcua.endpointUrl, pkiDir: opcua.pkiDir } : null,
    });
  });

  r.get('/dead-letters', role('viewer'), (req, res) => {
    const q = req.query as Record<string, string | undefined>;
    const limit = q.limit === undefined ? 100 : Number(q.limit);
    const offset = q.offset === undefined ? 0 : Number(q.offset);
    if (!Number.isInteger(limit) || limit < 1 || limit > 1000) return problem(res, 400, 'Bad request', 'limit must be an integer 1…1000');
    if (!Number.isInteger(offset) || offset < 0) return problem(res, 400, 'Bad request', 'offset must be an integer ≥ 0');
    const items = store.deadLetters({ channel: q.channel, unit: q.unit, limit, offset }).map((d) => ({
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
    res.json({ items, limit, offset });
  });

  r.post('/dead-letters/:channel/:event/requeue', role('administrator'), (req, res) => {
    const { channel, event } = req.params as { channel: string; event: string };
    const before = store.deadLetter(channel, event);
    if (!before) return problem(res, 404, 'Not found', `no dead letter ${event} on channel ${channel}`);
    store.requeue(channel, event, ctx.now());
    ctx.audit?.record({ user: req.user ?? 'system', action: 'signal.requeue', object: `signal:${channel}/${event}`, before, reason: typeof req.body?.reason === 'string' ? req.body.reason : null });
    for (const d of dispatchers) d.wake();
    res.json({ channel, eventId: event, requeuedAt: store.deadLetter(channel, event)?.requeued_at ?? null });
  });

  r.post('/endpoint/:unit/acknowledge', role('operator'), (req, res) => {
    if (!opcua) return problem(res, 409, 'Conflict', 'the OPC UA channel is not configured: there is no endpoint latch');
    const unit = (req.params as { unit: string }).unit;
    const by = req.user?.name ?? 'api';
    if (!opcua.acknowledgeEndpoint(unit, by)) return problem(res, 409, 'Conflict', `unit ${unit} has no latched endpoint to acknowledge`);
    res.json({ unit, latch: opcua.latch(unit) });
  });

  return r;
}
