/**
 * Live push on /live: per-browser subscriptions (plant, unit, batch), a snapshot then deltas.
 * Each client has a bounded queue; a slow client gets coalesced state (latest unit status, alarm,
 * endpoint) and gap notices instead of every result, so ingest never waits for a browser.
 */
import type { WebSocket } from 'ws';
import { z } from 'zod';
import { LIVE_PROTOCOL_VERSION, type LiveScope, type LiveServerMessage, type LiveSnapshot } from '../../core/api/live.ts';
import type { Alarm } from '../../core/api/rest.ts';
import type { AlarmState, EndpointState, EndpointStatus, MonitorResult } from '../../core/monitor/types.ts';
import { batchSummary } from '../api/views.ts';
import type { ServerConfig } from '../config.ts';
import type { IngestPipeline } from '../ingest/pipeline.ts';
import type { Logger } from '../logger.ts';
import type { Metrics } from '../metrics.ts';
import type { Storage } from '../storage/storage.ts';
import type { EventEmitter } from 'node:events';

const idSchema = z.string().min(1).max(128);
const clientMessageSchema = z.discriminatedUnion('type', [
  z.object({
    type: z.literal('subscribe'),
    id: z.string().min(1).max(64),
    scope: z.discriminatedUnion('kind', [
      z.object({ kind: z.literal('plant') }),
      z.object({ kind: z.literal('unit'), unit: idSchema }),
      z.object({ kind: z.literal('batch'), batch: idSchema }),
    ]),
    maxResults: z.number().int().min(0).max(50000).optional(),
  }),
  z.object({ type: z.literal('unsubscribe') }),
  z.object({ type: z.literal('ping'), t: z.number().optional() }),
]);

type Delta = Exclude<LiveServerMessage, { type: 'welcome' | 'pong' | 'error' | 'snapshot' }>;
/** A queued delta before the envelope fields are stamped. */
type Queued = DistributiveOmit<Delta, 'subscription' | 'n' | 'serverTime'>;
type DistributiveOmit<T, K extends keyof any> = T extends unknown ? Omit<T, K> : never;

interface Subscription {
  id: string;
  scope: LiveScope;
  /** Unit the subscription follows (unit scope, or the batch's unit). */
  unit: string | null;
  batch: string | null;
  maxResults: number;
  /** Results up to this seq are in the snapshot. */
  snapshotSeq: number;
}

const MAX_TEXT = 4096;

class LiveClient {
  sub: Subscription | null = null;
  queue: Queued[] = [];
  n = 0;
  ready = false;
  constructor(readonly ws: WebSocket) {}
}

export class LiveHub {
  private readonly clients = new Set<LiveClient>();
  private readonly dirtyUnits = new Set<string>();
  private unitTimer: NodeJS.Timeout | null = null;
  private pumpTimer: NodeJS.Timeout;

  constructor(
    private readonly pipeline: IngestPipeline,
    private readonly storage: Storage,
    private readonly config: ServerConfig,
    private readonly metrics: Metrics,
    private readonly log: Logger,
    events: EventEmitter,
  ) {
    events.on('result', (e: { unit: string; batch: string; result: MonitorResult }) => this.onResult(e));
    events.on('alarm', (e: { alarm: Alarm; previousState: AlarmState | null }) => this.onAlarm(e));
    events.on('endpoint', (e: { unit: string; batch: string; from: EndpointState; to: EndpointState; endpoint: EndpointStatus; t: number; seq: number }) =>
      this.broadcast((s) => matchesUnitOrBatch(s, e.unit, e.batch), { type: 'endpoint', ...e }),
    );
    events.on('batch', (e: { event: 'started' | 'ended'; batch: string; unit: string }) => void this.onBatch(e).catch((err) => this.log.error('live batch event failed', err)));
    events.on('unit-changed', (unit: string | null) => {
      if (unit) this.markUnit(unit);
    });
    this.pumpTimer = setInterval(() => {
      for (const c of this.clients) this.pump(c);
    }, 20);
    this.pumpTimer.unref();
  }

  get connectionCount(): number {
    return this.clients.size;
  }

  close(): void {
    clearInterval(this.pumpTimer);
    if (this.unitTimer) clearTimeout(this.unitTimer);
    for (const c of this.clients) c.ws.close(1001, 'server shutting down');
  }

  attach(ws: WebSocket): void {
    const c = new LiveClient(ws);
    this.clients.add(c);
    this.metrics.liveConnections.inc();
    ws.on('close', () => {
      this.clients.delete(c);
      this.metrics.liveConnections.dec();
    });
    ws.on('error', () => undefined);
    ws.on('message', (data: Buffer, binary: boolean) => {
      if (binary || data.byteLength > MAX_TEXT) {
        this.sendNow(c, { type: 'error', code: 'bad-message', message: `send JSON text messages of at most ${MAX_TEXT} bytes` });
        return;
      }
      let raw: unknown;
      try {
        raw = JSON.parse(data.toString('utf8'));
      } catch (e) {
        this.sendNow(c, { type: 'error', code: 'bad-json', message: `message is not valid JSON: ${(e as Error).message}` });
        return;
      }
      const p = clientMessageSchema.safeParse(raw);
      if (!p.success) {
        const i = p.error.issues[0]!;
        this.sendNow(c, { type: 'error', code: 'bad-message', message: `${i.path.join('.') || 'message'}: ${i.message}` });
        return;
      }
      const m = p.data;
      if (m.type === 'ping') this.sendNow(c, { type: 'pong', t: m.t ?? null, serverTime: Date.now() });
      else if (m.type === 'unsubscribe') {
        c.sub = null;
        c.queue = [];
      } else {
        void this.subscribe(c, m.id, m.scope, m.maxResults ?? 5000).catch((e) => {
          this.log.error('live subscribe failed', e);
          this.sendNow(c, { type: 'error', code: 'internal', message: `subscription failed: ${(e as Error).message}` });
        });
      }
    });
    this.sendNow(c, { type: 'welcome', protocol: LIVE_PROTOCOL_VERSION, serverTime: Date.now(), queueLimit: this.config.live.queueLimit });
  }

  private async subscribe(c: LiveClient, id: string, scope: LiveScope, maxResults: number) {
    c.sub = null;
    c.queue = [];
    c.ready = false;
    let unit: string | null = null;
    let batchId: string | null = null;
    if (scope.kind === 'unit') {
      if (!this.pipeline.units.has(scope.unit)) {
        this.sendNow(c, { type: 'error', code: 'unknown-unit', message: `unit "${scope.unit}" does not exist` });
        return;
      }
      unit = scope.unit;
      batchId = this.pipeline.openByUnit.get(unit)?.id ?? null;
    } else if (scope.kind === 'batch') {
      const b = await this.storage.getBatch(scope.batch);
      if (!b) {
        this.sendNow(c, { type: 'error', code: 'unknown-batch', message: `batch "${scope.batch}" does not exist` });
        return;
      }
      unit = b.unit;
      batchId = b.id;
    }
    const sub: Subscription = { id, scope, unit, batch: batchId, maxResults, snapshotSeq: -1 };
    c.sub = sub; // deltas from now on queue behind the snapshot
    const units = scope.kind === 'plant' ? [...this.pipeline.units.keys()] : [unit!];
    const statuses = units.map((u) => this.pipeline.unitStatus(u)!).filter(Boolean);
    let alarms: Alarm[];
    if (scope.kind === 'batch') alarms = (await this.storage.listAlarms({ batch: batchId!, limit: 10000, offset: 0 })).items;
    else alarms = this.pipeline.liveAlarms().filter((a) => scope.kind === 'plant' || a.unit === unit);
    let batch = null;
    let results: MonitorResult[] = [];
    let truncatedBefore: number | null = null;
    let model = null;
    if (batchId) {
      const row = await this.storage.getBatch(batchId);
      if (row) {
        batch = await batchSummary(this.storage, this.pipeline, row);
        model = batch.model;
        if (maxResults > 0) {
          const all = await this.storage.readResults(batchId, 0, Number.MAX_SAFE_INTEGER, 1_000_000);
          results = all.length > maxResults ? all.slice(all.length - maxResults) : all;
          if (results.length < all.length) truncatedBefore = results[0]?.seq ?? null;
          const pendingLatest = this.pipeline.openBatchById(batchId)?.latest;
          sub.snapshotSeq = results.length ? results[results.length - 1]!.seq : pendingLatest ? -1 : -1;
        }
      }
    }
    if (c.sub !== sub) return; // replaced meanwhile
    const snap: LiveSnapshot = {
      type: 'snapshot', subscription: id, n: ++c.n, serverTime: Date.now(), scope, units: statuses, alarms, batch, results,
      truncatedBefore, model,
    };
    // Drop queued results already contained in the snapshot.
    c.queue = c.queue.filter((q) => q.type !== 'result' || q.result.seq > sub.snapshotSeq);
    this.sendRaw(c, snap);
    c.ready = true;
    this.pump(c);
  }

  private onResult(e: { unit: string; batch: string; result: MonitorResult }) {
    for (const c of this.clients) {
      const s = c.sub;
      if (!s || s.scope.kind === 'plant') continue;
      if (s.scope.kind === 'unit' && s.unit === e.unit) {
        if (s.batch !== e.batch) s.batch = e.batch;
      } else if (s.batch !== e.batch) continue;
      this.enqueue(c, { type: 'result', unit: e.unit, batch: e.batch, result: e.result });
    }
  }

  private onAlarm(e: { alarm: Alarm; previousState: AlarmState | null }) {
    this.broadcast((s) => s.scope.kind === 'plant' || s.unit === e.alarm.unit, { type: 'alarm', alarm: e.alarm, previousState: e.previousState });
  }

  private async onBatch(e: { event: 'started' | 'ended'; batch: string; unit: string }) {
    const row = await this.storage.getBatch(e.batch);
    if (!row) return;
    const summary = await batchSummary(this.storage, this.pipeline, row);
    for (const c of this.clients) {
      const s = c.sub;
      if (s?.scope.kind === 'unit' && s.unit === e.unit && e.event === 'started') s.batch = e.batch;
    }
    this.broadcast((s) => matchesUnitOrBatch(s, e.unit, e.batch), { type: 'batch', event: e.event, batch: summary });
  }

  private markUnit(unit: string) {
    this.dirtyUnits.add(unit);
    if (this.unitTimer) return;
    this.unitTimer = setTimeout(() => {
      this.unitTimer = null;
      const units = [...this.dirtyUnits];
      this.dirtyUnits.clear();
      for (const u of units) {
        const st = this.pipeline.unitStatus(u);
        if (st) this.broadcast((s) => s.scope.kind === 'plant' || s.unit === u, { type: 'unit', unit: st });
      }
    }, this.config.live.unitStatusEveryMs);
    this.unitTimer.unref();
  }

  private broadcast(match: (s: Subscription) => boolean, m: Queued) {
    for (const c of this.clients) if (c.sub && match(c.sub)) this.enqueue(c, m);
  }

  private enqueue(c: LiveClient, m: Queued) {
    const limit = this.config.live.queueLimit;
    if (c.queue.length >= limit) this.coalesce(c, m);
    else c.queue.push(m);
    if (c.ready && c.queue.length === 1) this.pump(c);
  }

  /** The queue is full: keep the latest state per key, turn results into gap notices. */
  private coalesce(c: LiveClient, m: Queued) {
    if (m.type === 'result') {
      this.metrics.liveDropped.inc();
      const last = c.queue[c.queue.length - 1];
      if (last && last.type === 'gap' && last.batch === m.batch) last.toSeq = m.result.seq;
      else c.queue.push({ type: 'gap', unit: m.unit, batch: m.batch, fromSeq: m.result.seq, toSeq: m.result.seq });
      return;
    }
    const key = coalesceKey(m);
    if (key) c.queue = c.queue.filter((q) => coalesceKey(q) !== key);
    // Still full: drop the oldest results (as gaps) to make room for state messages.
    if (c.queue.length >= this.config.live.queueLimit) {
      const out: Queued[] = [];
      for (const q of c.queue) {
        if (q.type === 'result') {
          this.metrics.liveDropped.inc();
          const last = out[out.length - 1];
          if (last && last.type === 'gap' && last.batch === q.batch) last.toSeq = q.result.seq;
          else out.push({ type: 'gap', unit: q.unit, batch: q.batch, fromSeq: q.result.seq, toSeq: q.result.seq });
        } else out.push(q);
      }
      c.queue = out;
    }
    c.queue.push(m);
  }

  private pump(c: LiveClient) {
    if (!c.ready || !c.sub || c.ws.readyState !== c.ws.OPEN) return;
    let i = 0;
    const hw = this.config.live.highWaterBytes;
    while (i < c.queue.length && c.ws.bufferedAmount < hw) {
      const q = c.queue[i++]!;
      this.sendRaw(c, { ...q, subscription: c.sub.id, n: ++c.n, serverTime: Date.now() } as LiveServerMessage);
    }
    if (i) c.queue = c.queue.slice(i);
  }

  private sendNow(c: LiveClient, m: LiveServerMessage) {
    this.sendRaw(c, m);
  }

  private sendRaw(c: LiveClient, m: LiveServerMessage) {
    if (c.ws.readyState !== c.ws.OPEN) return;
    c.ws.send(JSON.stringify(m));
  }
}

function matchesUnitOrBatch(s: Subscription, unit: string, batch: string) {
  if (s.scope.kind === 'plant') return true;
  if (s.scope.kind === 'unit') return s.unit === unit;
  return s.batch === batch;
}

function coalesceKey(q: Queued): string | null {
  switch (q.type) {
    case 'unit':
      return `unit:${q.unit.id}`;
    case 'alarm':
      return `alarm:${q.alarm.id}`;
    case 'endpoint':
      return `endpoint:${q.batch}`;
    case 'batch':
      return `batch:${q.batch.id}`;
    default:
      return null;
  }
}
