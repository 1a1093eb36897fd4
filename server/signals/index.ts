/**
 * Signals: delivers the outbox to the control system and other receivers over OPC UA,
 * MQTT and webhooks, each channel in per-unit sequence order with its own durable cursor.
 * install(ctx) is called by server/app.ts. Settings: `signals` in the server configuration
 * (server/signals/config.ts, docs/signals.md).
 *
 * Tideline advises; the site's validated control strategy, interlocks and procedures decide what a
 * signal may do.
 */
import type { MonitorResult } from '../../core/monitor/types.ts';
import type { ServerContext } from '../context.ts';
import { startAnchorPublisher, type AnchorSink } from './audit-anchor.ts';
import { parseSignalsConfig } from './config.ts';
import { SignalDispatcher, type SignalChannel } from './dispatcher.ts';
import type { MqttChannel } from './mqtt-channel.ts';
import type { OpcuaChannel } from './opcua/opcua-channel.ts';
import type { SignalEnvelope, SignalRepository } from './outbox-store.ts';
import { addSignalRoutes } from './routes.ts';
import { WebhookChannel } from './webhook-channel.ts';

export { SIGNALS_CAUTION } from './routes.ts';

export interface SignalsHandle {
  store: SignalRepository;
  dispatchers: SignalDispatcher[];
  opcua: OpcuaChannel | null;
  mqtt: MqttChannel | null;
}

export async function install(ctx: ServerContext): Promise<SignalsHandle> {
  const cfg = parseSignalsConfig((ctx.config as { signals?: unknown }).signals);
  const store = ctx.storage.signals;
  const channels: SignalChannel[] = [];
  const anchorSinks: AnchorSink[] = [];
  for (const w of cfg.webhooks) {
    const ch = new WebhookChannel(w, ctx.now);
    channels.push(ch);
    anchorSinks.push(ch);
  }
  let mqtt: MqttChannel | null = null;
  // node-opcua and mqtt are loaded only when their channel is configured (node-opcua takes seconds to load)
  if (cfg.mqtt) {
    const { MqttChannel } = await import('./mqtt-channel.ts');
    mqtt = new MqttChannel(cfg.mqtt, store, ctx.now);
    channels.push(mqtt);
    anchorSinks.push(mqtt);
  }
  let opcua: OpcuaChannel | null = null;
  if (cfg.opcua) {
    const { OpcuaChannel } = await import('./opcua/opcua-channel.ts');
    opcua = new OpcuaChannel(cfg.opcua, store, {
      dataDir: ctx.config.dataDir,
      now: ctx.now,
      onAlarmAcknowledged: (unit, alarmId, comment) => {
        ctx.ingest
          .acknowledgeAlarm(alarmId, 'opcua-client', comment ? `over OPC UA: ${comment}` : 'acknowledged over OPC UA')
          .then(async (after) => {
            await ctx.audit?.record({ user: 'opcua-client', action: 'alarm.acknowledge', object: `alarm:${alarmId}`, after: { state: after.state }, reason: comment || 'acknowledged over OPC UA' });
            ctx.log.info(`alarm ${alarmId} on ${unit} acknowledged over OPC UA`);
          })
          .catch((e: Error) => ctx.log.warn(`OPC UA acknowledge of alarm ${alarmId} on ${unit} not applied: ${e.message}`));
      },
      onEndpointAcknowledged: (unit, latch, by, at) => {
        ctx.audit
          ?.record({ user: by, action: 'endpoint.acknowledge', object: `unit:${unit}`, before: latch, after: { reached: false, acknowledgedAt: at }, reason: 'endpoint reached acknowledged by the control system' })
          .catch((e: Error) => ctx.log.error(`audit record of the endpoint acknowledge on ${unit} failed`, e));
        ctx.log.info(`endpoint of ${latch.batch ?? '?'} on ${unit} acknowledged by ${by}`);
      },
    });
    channels.push(opcua);
    anchorSinks.push(opcua);
  }

  // done → signalled once any channel has delivered the 'done' event
  const signalled = new Set<string>();
  const onDelivered = (_channel: string, e: SignalEnvelope) => {
    const p = e.payload as { to?: string; batch?: string; t?: number };
    if (e.type !== 'endpoint-state' || p.to !== 'done' || !p.batch || signalled.has(e.id)) return;
    signalled.add(e.id);
    void ctx.ingest.markSignalled(p.batch, ctx.now()).catch((err: unknown) => ctx.log.error(`marking ${p.batch} signalled failed`, err));
  };
  const dispatchers = channels.map(
    (ch) =>
      new SignalDispatcher(store, ch, {
        pollMs: cfg.pollMs,
        now: ctx.now,
        startAtEnd: !cfg.replayHistory,
        onDelivered,
        onGap: (channel, unit, from, to, waitedMs) => {
          ctx.metrics.signalGaps.inc({ channel });
          ctx.log.error(`signals/${channel}: unit ${unit} has no outbox row${from === to ? ` #${from}` : `s #${from}–${to}`} after ${(waitedMs / 1000).toFixed(1)} s; delivery goes on past the gap — those events were never committed (look for a failed commit in this log)`);
          // and an alarm on the unit, so that the operator sees a signal may have been lost
          void ctx.ingest.signalGap(channel, unit, from, to, waitedMs).catch((err: unknown) => ctx.log.error(`raising the signal-gap alarm of unit ${unit} failed`, err));
        },
        onError: (channel, e, err, attempts, dead) => {
          const text = `signals/${channel}: event ${e.id} (${e.unit} #${e.seq}) attempt ${attempts} failed: ${err.message}${dead ? ' — dead-lettered' : ''}`;
          if (dead) ctx.log.warn(text);
          else ctx.log.debug(text);
        },
      }),
  );
  // register before the channels rebuild their state from what they already delivered
  for (const ch of channels) await store.registerChannel(ch.name, ctx.now(), !cfg.replayHistory);
  if (mqtt) {
    const d = dispatchers[channels.indexOf(mqtt)]!;
    mqtt.onReady = () => d.wake();
    await mqtt.start();
  }
  if (opcua) {
    await opcua.start();
    opcua.ensureUnits(ctx.ingest.units.keys());
    ctx.log.info(`OPC UA server at ${opcua.endpointUrl} (security: ${cfg.opcua!.securityModes.join(', ')}; PKI ${opcua.pkiDir})`);
  }
  for (const d of dispatchers) d.start();

  ctx.events.on('outbox', () => {
    for (const d of dispatchers) d.wake();
  });
  ctx.events.on('result', (e: { unit: string; batch: string; result: MonitorResult }) => {
    mqtt?.onResult(e.unit, e.result, { batch: e.batch });
    opcua?.onResult(e.unit, e.result, { batch: e.batch });
  });

  addSignalRoutes(ctx.routes, ctx, store, dispatchers, opcua);

  // the audit trail's head, to the log and every channel, at start and then every auditAnchorEveryMs
  const audit = ctx.audit;
  const anchors = audit
    ? startAnchorPublisher({ everyMs: cfg.auditAnchorEveryMs, now: ctx.now, head: () => audit.anchor(), sinks: anchorSinks, log: ctx.log })
    : null;

  ctx.onClose(async () => {
    anchors?.stop();
    // A delivery in flight to a receiver that has gone silent may wait its whole timeout (per
    // channel settings, up to minutes): shutdown waits at most 3 s for it, then stops the channels.
    // Its event was not marked delivered, so it is sent again after the restart.
    const stopped = Promise.all(dispatchers.map((d) => d.stop()));
    let timer: NodeJS.Timeout | undefined;
    const waited = await Promise.race([stopped.then(() => true), new Promise<boolean>((r) => (timer = setTimeout(() => r(false), 3000)))]);
    clearTimeout(timer);
    if (!waited) ctx.log.warn('signals: a delivery was still in flight at shutdown; it will be sent again after the restart');
    await mqtt?.stop();
    await opcua?.stop();
  });
  return { store, dispatchers, opcua, mqtt };
}
