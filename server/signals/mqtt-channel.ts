/**
 * MQTT channel (mqtt package, MQTT 3.1.1/5 broker such as Eclipse Mosquitto). Topic layout, our own
 * (docs/signals.md):
 *
 *   <prefix>/v1/status               retained, QoS 1: {"online":true|false,"t":…,"server":…}; the
 *                                    offline message is also the connection's last will
 *   <prefix>/v1/units/<unit>/events  QoS 1, not retained: every outbox event {id, unit, seq, type, createdAt, payload}
 *   <prefix>/v1/units/<unit>/state   retained, QoS 1: the unit's current state (UnitSignalState)
 *   <prefix>/v1/audit/anchor         retained, QoS 1: the audit trail's head {type, anchor, seq, hash, t},
 *                                    at signals.auditAnchorEveryMs (audit-anchor.ts)
 *
 * An event counts as delivered when the broker acknowledged it (PUBACK); the channel never
 * dead-letters, it waits for the broker. Subscribers deduplicate by event id (a restart between
 * PUBACK and the cursor update sends the same event again, same id and seq).
 */
import mqtt, { type MqttClient } from 'mqtt';
import type { MonitorResult } from '../../core/monitor/types.ts';
import type { AnchorMessage, AnchorSink } from './audit-anchor.ts';
import type { SignalChannel } from './dispatcher.ts';
import { envelopeOf, type SignalEnvelope, type SignalRepository } from './outbox-store.ts';
import { applyEvent, applyResult, emptyUnitState, type UnitSignalState } from './unit-state.ts';

export interface MqttConfig {
  url: string;
  prefix: string;
  clientId: string;
  username?: string;
  password?: string;
  /** Longest wait for a PUBACK before the attempt counts as failed, ms. */
  publishTimeoutMs: number;
  /** Retained state is republished on new results at most this often per unit, ms. */
  stateEveryMs: number;
  keepaliveS: number;
}

export const MQTT_CHANNEL = 'mqtt';

export function mqttTopics(prefix: string) {
  return {
    status: `${prefix}/v1/status`,
    events: (unit: string) => `${prefix}/v1/units/${unit}/events`,
    state: (unit: string) => `${prefix}/v1/units/${unit}/state`,
    anchor: `${prefix}/v1/audit/anchor`,
  };
}

export class MqttChannel implements SignalChannel, AnchorSink {
  readonly name = MQTT_CHANNEL;
  readonly maxAttempts = Number.POSITIVE_INFINITY;
  readonly backoff = { baseMs: 500, capMs: 10_000 };
  private client: MqttClient | null = null;
  private readonly states = new Map<string, UnitSignalState>();
  private readonly lastStateAt = new Map<string, number>();
  private readonly topics;
  private lastAnchor: AnchorMessage | null = null;
  /** Called when the broker connection comes up (the dispatcher should look at once). */
  onReady: () => void = () => undefined;

  constructor(
    private readonly cfg: MqttConfig,
    private readonly store: SignalRepository,
    private readonly now: () => number = Date.now,
  ) {
    if (!/^(mqtts?|wss?|tcp):\/\//.test(cfg.url)) throw new Error(`mqtt.url must start with mqtt://, mqtts://, ws:// or wss://, got '${cfg.url}'`);
    if (/[#+]/.test(cfg.prefix) || cfg.prefix.startsWith('/') || cfg.prefix.endsWith('/')) throw new Error(`mqtt.prefix '${cfg.prefix}' must not contain # or + nor start or end with /`);
    this.topics = mqttTopics(cfg.prefix);
  }

  private statusPayload(online: boolean): string {
    return JSON.stringify({ online, t: this.now(), server: this.cfg.clientId });
  }

  /** Rebuild each unit's state from the events this channel already delivered, then connect. */
  async start(): Promise<void> {
    for (const unit of await this.store.units()) {
      let s = emptyUnitState(unit, this.now());
      for (const row of await this.store.delivered(this.name, unit)) s = applyEvent(s, envelopeOf(row), this.now());
      this.states.set(unit, s);
    }
    const client = mqtt.connect(this.cfg.url, {
      clientId: this.cfg.clientId,
      username: this.cfg.username,
      password: this.cfg.password,
      clean: true,
      keepalive: this.cfg.keepaliveS,
      reconnectPeriod: 1000,
      connectTimeout: 10_000,
      will: { topic: this.topics.status, payload: Buffer.from(JSON.stringify({ online: false, server: this.cfg.clientId, reason: 'connection lost' })), qos: 1, retain: true },
    });
    client.on('connect', () => {
      client.publish(this.topics.status, this.statusPayload(true), { qos: 1, retain: true });
      for (const [unit, s] of this.states) this.publishState(unit, s).catch(() => undefined);
      if (this.lastAnchor) this.publish(this.topics.anchor, JSON.stringify(this.lastAnchor), true).catch(() => undefined);
      this.onReady();
    });
    client.on('error', () => undefined); // reconnects on its own; delivery waits through isReady()
    this.client = client;
  }

  isReady(): boolean {
    return this.client?.connected === true;
  }

  private publish(topic: string, payload: string, retain: boolean): Promise<void> {
    const client = this.client;
    if (!client) return Promise.reject(new Error('mqtt channel not started'));
    return new Promise<void>((resolve, reject) => {
      const timer = setTimeout(() => reject(new Error(`no PUBACK from the broker within ${this.cfg.publishTimeoutMs} ms`)), this.cfg.publishTimeoutMs);
      client.publish(topic, payload, { qos: 1, retain }, (err) => {
        clearTimeout(timer);
        if (err) reject(err);
        else resolve();
      });
    });
  }

  private publishState(unit: string, s: UnitSignalState): Promise<void> {
    this.lastStateAt.set(unit, this.now());
    return this.publish(this.topics.state(unit), JSON.stringify(s), true);
  }

  async deliver(event: SignalEnvelope): Promise<void> {
    await this.publish(this.topics.events(event.unit), JSON.stringify(event), false);
    const s = applyEvent(this.states.get(event.unit) ?? emptyUnitState(event.unit, this.now()), event, this.now());
    this.states.set(event.unit, s);
    await this.publishState(event.unit, s);
  }

  /**
   * The audit trail's anchor, retained: a subscriber that comes later still finds the latest. While
   * the broker is away the latest one waits and goes out when the connection comes up.
   */
  async sendAnchor(m: AnchorMessage): Promise<void> {
    this.lastAnchor = m;
    if (!this.isReady()) return;
    await this.publish(this.topics.anchor, JSON.stringify(m), true);
  }

  /** Live values from a new monitor result; the retained state is republished at most every stateEveryMs. */
  onResult(unit: string, result: MonitorResult, meta: { batch?: string | null; modelVersion?: string | null }): void {
    const s = applyResult(this.states.get(unit) ?? emptyUnitState(unit, this.now()), result, meta, this.now());
    this.states.set(unit, s);
    const last = this.lastStateAt.get(unit) ?? 0;
    if (this.isReady() && this.now() - last >= this.cfg.stateEveryMs) this.publishState(unit, s).catch(() => undefined);
  }

  state(unit: string): UnitSignalState | undefined {
    return this.states.get(unit);
  }

  /**
   * Publish 'offline' (retained) and disconnect, in bounded time: with the broker gone (or gone
   * silent) neither the offline message nor mqtt.js's wait for in-flight PUBACKs may hold the
   * shutdown. Each wait is capped at publishTimeoutMs (at most 2 s), then the connection is
   * dropped; events not acknowledged are sent again after a restart (the cursor had not moved), and
   * the last will tells subscribers the server went offline.
   */
  async stop(): Promise<void> {
    const client = this.client;
    if (!client) return;
    this.client = null;
    const capMs = Math.min(this.cfg.publishTimeoutMs, 2000);
    const within = (p: Promise<unknown>) =>
      new Promise<boolean>((resolve) => {
        const timer = setTimeout(() => resolve(false), capMs);
        p.then(
          () => (clearTimeout(timer), resolve(true)),
          () => (clearTimeout(timer), resolve(false)),
        );
      });
    if (client.connected) {
      await within(new Promise<void>((resolve) => client.publish(this.topics.status, this.statusPayload(false), { qos: 1, retain: true }, () => resolve())));
    }
    // A clean DISCONNECT only when connected with nothing in flight; else drop the connection.
    const inFlight = Object.keys(client.outgoing).length > 0;
    if (client.connected && !inFlight && (await within(client.endAsync(false)))) return;
    if (!client.disconnecting) await within(client.endAsync(true));
    client.stream?.destroy();
  }
}
