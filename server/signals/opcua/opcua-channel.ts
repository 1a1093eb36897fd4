/**
 * OPC UA server channel (IEC 62541, node-opcua 2.182.2). A DCS reads per unit the batch, progress,
 * endpoint handshake, predicted property, T²/Q with limits, model version, heartbeat and NAMUR
 * NE 107 analyzer status, with Uncertain/Bad status codes when the data are not to be trusted, and
 * receives Tideline's alarms as Alarms & Conditions events.
 *
 * Delivery: each outbox event is folded into the unit's state and written to the address space;
 * "endpoint reached" is latched in the storage (SignalRepository.latches; the channel keeps a copy
 * of each unit's latch in memory, being the latch's only writer) and stays true until the DCS
 * writes EndpointAcknowledge = true. The channel never dead-letters.
 *
 * Tideline advises; the site's validated control strategy, interlocks and procedures decide what
 * the DCS does with these signals.
 */
import { mkdirSync } from 'node:fs';
import { createServer } from 'node:net';
import { join } from 'node:path';
import {
  DataType,
  MessageSecurityMode,
  OPCUACertificateManager,
  OPCUAServer,
  SecurityPolicy,
  StatusCodes,
  Variant,
  nodesets,
  type Namespace,
  type UAObject,
  type UAVariable,
} from 'node-opcua';
import type { MonitorResult } from '../../../core/monitor/types.ts';
import type { AnchorMessage, AnchorSink } from '../audit-anchor.ts';
import type { OpcuaSettings } from '../config.ts';
import type { SignalChannel } from '../dispatcher.ts';
import type { LatchRow } from '../../storage/repositories.ts';
import { envelopeOf, type SignalEnvelope, type SignalRepository } from '../outbox-store.ts';
import { applyEvent, applyResult, emptyUnitState, type UnitSignalState } from '../unit-state.ts';
import { MIRRORED_ALARMS } from './alarm-mirror.ts';
import { UnitNodes } from './unit-nodes.ts';

export const OPCUA_CHANNEL = 'opcua';

export interface OpcuaChannelOptions {
  dataDir: string;
  now?: () => number;
  softwareVersion?: string;
  /** A client acknowledged an alarm condition over OPC UA (forward to the alarm life cycle). */
  onAlarmAcknowledged?: (unit: string, alarmId: string, comment: string) => void;
  /** Called after the DCS acknowledged "endpoint reached" (for the audit trail). */
  onEndpointAcknowledged?: (unit: string, latch: LatchRow, by: string, at: number) => void;
}

async function freePort(host: string): Promise<number> {
  return new Promise((resolve, reject) => {
    const s = createServer();
    s.once('error', reject);
    s.listen(0, host, () => {
      const port = (s.address() as { port: number }).port;
      s.close(() => resolve(port));
    });
  });
}

const POLICY: Record<OpcuaSettings['securityPolicies'][number], SecurityPolicy> = {
  Basic256Sha256: SecurityPolicy.Basic256Sha256,
  Aes128_Sha256_RsaOaep: SecurityPolicy.Aes128_Sha256_RsaOaep,
  Aes256_Sha256_RsaPss: SecurityPolicy.Aes256_Sha256_RsaPss,
};

export class OpcuaChannel implements SignalChannel, AnchorSink {
  readonly name = OPCUA_CHANNEL;
  readonly maxAttempts = Number.POSITIVE_INFINITY;
  readonly backoff = { baseMs: 200, capMs: 5000 };
  private server: OPCUAServer | null = null;
  private ns: Namespace | null = null;
  private root: UAObject | null = null;
  private notifier: UAObject | null = null;
  private anchorVar: UAVariable | null = null;
  private readonly units = new Map<string, UnitNodes>();
  private readonly states = new Map<string, UnitSignalState>();
  /** Each unit's endpoint latch as stored (read at start, replaced after every write). */
  private readonly latches = new Map<string, LatchRow>();
  private heartbeat = 0;
  private timer: NodeJS.Timeout | null = null;
  private readonly now: () => number;
  port = 0;

  constructor(
    private readonly cfg: OpcuaSettings,
    private readonly store: SignalRepository,
    private readonly opts: OpcuaChannelOptions,
  ) {
    this.now = opts.now ?? Date.now;
  }

  get endpointUrl(): string {
    return `opc.tcp://${this.cfg.hostname ?? '127.0.0.1'}:${this.port}/UA/Tideline`;
  }

  get pkiDir(): string {
    return this.cfg.pkiDir ?? join(this.opts.dataDir, 'pki', 'opcua');
  }

  async start(): Promise<void> {
    const host = this.cfg.hostname ?? '127.0.0.1';
    this.port = this.cfg.port === 0 ? await freePort(host) : this.cfg.port;
    mkdirSync(this.pkiDir, { recursive: true });
    const serverCertificateManager = new OPCUACertificateManager({
      rootFolder: this.pkiDir,
      automaticallyAcceptUnknownCertificate: this.cfg.acceptUnknownCertificates,
    });
    await serverCertificateManager.initialize();
    const modes = this.cfg.securityModes.map((m) => MessageSecurityMode[m]);
    const policies: SecurityPolicy[] = [];
    if (this.cfg.securityModes.includes('None')) policies.push(SecurityPolicy.None);
    if (this.cfg.securityModes.some((m) => m !== 'None')) policies.push(...this.cfg.securityPolicies.map((p) => POLICY[p]));
    const server = new OPCUAServer({
      port: this.port,
      hostname: host,
      resourcePath: '/UA/Tideline',
      serverCertificateManager,
      securityModes: modes,
      securityPolicies: policies,
      allowAnonymous: this.cfg.allowAnonymous,
      nodeset_filename: [nodesets.standard],
      buildInfo: { productName: 'Tideline', productUri: 'urn:tideline', manufacturerName: 'Tideline project', softwareVersion: this.opts.softwareVersion ?? '0.1.0' },
      serverInfo: { applicationUri: `urn:tideline:${host}`, productUri: 'urn:tideline', applicationName: { text: 'Tideline', locale: 'en' } },
    });
    await server.initialize();
    const addressSpace = server.engine.addressSpace!;
    addressSpace.installAlarmsAndConditionsService();
    const ns = addressSpace.getOwnNamespace();
    this.notifier = addressSpace.rootFolder.objects.server;
    this.root = ns.addObject({ browseName: 'Tideline', organizedBy: addressSpace.rootFolder.objects, notifierOf: this.notifier, eventNotifier: 1, description: 'Tideline advises; the site control strategy decides' });
    // Tideline/AuditAnchor: the audit trail's head SEQ:HASH, set at signals.auditAnchorEveryMs
    this.anchorVar = ns.addVariable({
      componentOf: this.root,
      browseName: 'AuditAnchor',
      dataType: 'String',
      description: 'The audit trail head as SEQ:HASH, for a historian to keep outside the server (tideline audit verify --anchor)',
      minimumSamplingInterval: 1000,
    });
    this.anchorVar.setValueFromSource(new Variant({ dataType: DataType.String, value: '' }), StatusCodes.BadWaitingForInitialData);
    this.ns = ns;
    this.server = server;
    for (const l of await this.store.latches.all()) this.latches.set(l.unit, l);
    for (const unit of await this.store.units()) {
      let s = emptyUnitState(unit, this.now());
      for (const row of await this.store.delivered(this.name, unit)) s = applyEvent(s, envelopeOf(row), this.now());
      this.states.set(unit, s);
      const nodes = this.nodesFor(unit);
      for (const a of s.alarms) nodes.alarms.mirror(a);
      nodes.update(s, this.latchView(unit));
    }
    await server.start();
    this.timer = setInterval(() => this.beat(), this.cfg.heartbeatMs);
    this.timer.unref();
  }

  async sendAnchor(m: AnchorMessage): Promise<void> {
    if (!this.anchorVar) throw new Error('OPC UA server not started');
    this.anchorVar.setValueFromSource(new Variant({ dataType: DataType.String, value: m.anchor }), StatusCodes.Good, new Date(m.t));
  }

  private beat(): void {
    this.heartbeat = (this.heartbeat + 1) >>> 0;
    for (const n of this.units.values()) n.beat(this.heartbeat);
  }

  private latchView(unit: string): { reached: boolean; t: number | null; reason: string | null } {
    const l = this.latches.get(unit);
    return l ? { reached: l.reached === 1, t: l.reached_at, reason: l.reason } : { reached: false, t: null, reason: null };
  }

  private nodesFor(unit: string): UnitNodes {
    let n = this.units.get(unit);
    if (!n) {
      if (!this.ns || !this.root || !this.notifier) throw new Error('OPC UA server not started');
      n = new UnitNodes(this.ns, this.root, this.notifier, unit, {
        propertyRange: this.cfg.propertyRange[unit] ?? { low: 0, high: 100 },
        maxTimeShelvedMs: this.cfg.maxTimeShelvedMs,
        now: this.now,
        onAcknowledge: (u) => {
          this.acknowledgeEndpoint(u, 'opcua-client').catch((e: Error) => console.error(`signals/opcua: the endpoint acknowledge of ${u} was not stored: ${e.message}`));
        },
        onAlarmAcknowledge: (u, id, comment) => this.opts.onAlarmAcknowledged?.(u, id, comment),
      });
      n.beat(this.heartbeat);
      this.units.set(unit, n);
    }
    return n;
  }

  /** Create the folders of units known to the server even before their first event. */
  ensureUnits(units: Iterable<string>): void {
    for (const unit of units) {
      if (this.units.has(unit)) continue;
      const s = this.states.get(unit) ?? emptyUnitState(unit, this.now());
      this.states.set(unit, s);
      this.nodesFor(unit).update(s, this.latchView(unit));
    }
  }

  isReady(): boolean {
    return this.server !== null;
  }

  async deliver(event: SignalEnvelope): Promise<void> {
    const nodes = this.nodesFor(event.unit);
    const prev = this.states.get(event.unit) ?? emptyUnitState(event.unit, this.now());
    const s = applyEvent(prev, event, this.now());
    this.states.set(event.unit, s);
    if ((event.type === 'endpoint-state' || event.type === 'endpoint') && s.endpoint.reached && !(prev.endpoint.reached && prev.endpoint.t === s.endpoint.t)) {
      const p = event.payload as { to?: string };
      if (p.to === 'done' || (p.to === 'signalled' && !this.latches.get(event.unit)?.event_id)) {
        const latched = await this.store.latches.set(event.unit, s.batch, s.endpoint.t ?? event.createdAt, s.endpoint.reason ?? '', event.id);
        if (latched) this.latches.set(event.unit, latched);
      }
    }
    if (event.type === 'alarm' || event.type === 'condition') {
      const before = new Map(prev.alarms.map((a) => [a.key, a]));
      const after = new Map(s.alarms.map((a) => [a.key, a]));
      for (const key of new Set([...before.keys(), ...after.keys()])) {
        const a = after.get(key);
        const b = before.get(key)!;
        if (a) nodes.alarms.mirror(a);
        else if (b.kind in MIRRORED_ALARMS || key in MIRRORED_ALARMS) nodes.alarms.mirror({ ...b, active: false, state: 'normal', shelf: null, suppressed: false, t: event.createdAt });
      }
    }
    nodes.update(s, this.latchView(event.unit));
  }

  onResult(unit: string, result: MonitorResult, meta: { batch?: string | null; modelVersion?: string | null }): void {
    if (!this.server) return;
    const s = applyResult(this.states.get(unit) ?? emptyUnitState(unit, this.now()), result, meta, this.now());
    this.states.set(unit, s);
    this.nodesFor(unit).update(s, this.latchView(unit));
  }

  /** The DCS (or an operator through the API) acknowledged "endpoint reached": reset the latch. */
  async acknowledgeEndpoint(unit: string, by: string): Promise<boolean> {
    const at = this.now();
    const prev = await this.store.latches.acknowledge(unit, by, at);
    if (!prev) return false;
    const now = await this.store.latches.get(unit);
    if (now) this.latches.set(unit, now);
    const s = this.states.get(unit);
    if (s) this.nodesFor(unit).update(s, this.latchView(unit));
    this.opts.onEndpointAcknowledged?.(unit, prev, by, at);
    return true;
  }

  state(unit: string): UnitSignalState | undefined {
    return this.states.get(unit);
  }

  /** The unit's endpoint latch as stored. */
  latch(unit: string): LatchRow | undefined {
    return this.latches.get(unit);
  }

  async stop(): Promise<void> {
    if (this.timer) clearInterval(this.timer);
    this.timer = null;
    const server = this.server;
    this.server = null;
    if (server) await server.shutdown(0);
  }
}
