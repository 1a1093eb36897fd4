/**
 * One channel's delivery loop: for every unit, the outbox rows above the channel's cursor are sent
 * one at a time in unit_seq order; the cursor moves only after the receiver confirmed (HTTP 2xx,
 * MQTT PUBACK, OPC UA value set). A failure blocks that unit's queue (order is kept) and is retried
 * with backoff; after `maxAttempts` the row is dead-lettered and the queue moves on. Units are
 * independent: one unit's failing row does not hold up another unit.
 *
 * A unit's rows are delivered without a gap: when the next row above the cursor is not the one right
 * after it, delivery of that unit waits (a row numbered before it may still be on its way to the
 * outbox) and goes on past the gap only when it has stood for `gapWaitMs`, reporting it through
 * `onGap`. The server commits a unit's rows in seq order, so a gap is a fault to look into, never
 * the normal case.
 *
 * After a restart the loop resumes from the stored cursors. A row confirmed by the receiver but
 * not yet marked when the process died is sent again with the same id and seq: receivers
 * deduplicate by id.
 */
import { backoffDelay, DEFAULT_BACKOFF, type BackoffPolicy } from './backoff.ts';
import { envelopeOf, type SignalEnvelope, type SignalRepository } from './outbox-store.ts';

export interface SignalChannel {
  /** Cursor key, e.g. 'mqtt', 'opcua', 'webhook:historian'. */
  readonly name: string;
  /** Attempts before dead-lettering; Infinity to wait for the receiver forever (OPC UA, MQTT). */
  readonly maxAttempts: number;
  readonly backoff?: BackoffPolicy;
  /** When false the loop waits without counting attempts (e.g. MQTT not connected). */
  isReady?(): boolean;
  /** Resolve when the receiver confirmed, reject otherwise. */
  deliver(event: SignalEnvelope): Promise<void>;
}

export interface DispatcherOptions {
  /** Idle poll interval, ms (new rows also wake the loop through wake()). */
  pollMs?: number;
  /** Rows fetched per unit per pass. */
  batchSize?: number;
  now?: () => number;
  random?: () => number;
  /** Called on every failed attempt (logging). */
  onError?: (channel: string, event: SignalEnvelope, error: Error, attempts: number, dead: boolean) => void;
  /** Called after the receiver confirmed an event and the cursor moved past it. */
  onDelivered?: (channel: string, event: SignalEnvelope) => void;
  /** How long a gap in a unit's seq may stand before delivery goes on past it, ms (default 5000: many group commits). */
  gapWaitMs?: number;
  /** Called when delivery goes on past a gap (seqs `from`…`to` missing) that stood for `waitedMs`. */
  onGap?: (channel: string, unit: string, from: number, to: number, waitedMs: number) => void;
  /** A channel running for the first time starts at the end of the outbox instead of replaying it (default false: replay). */
  startAtEnd?: boolean;
}

export interface DispatcherStats {
  delivered: number;
  failed: number;
  dead: number;
  /** Gaps in a unit's seq that delivery went past after gapWaitMs. */
  gaps: number;
}

export class SignalDispatcher {
  private stopped = true;
  private loop: Promise<void> | null = null;
  private wakeUp: (() => void) | null = null;
  private readonly pollMs: number;
  private readonly batchSize: number;
  private readonly now: () => number;
  private readonly random: () => number;
  readonly stats: DispatcherStats = { delivered: 0, failed: 0, dead: 0, gaps: 0 };
  /** Per unit: the first missing seq of a gap seen and since when. */
  private readonly gapSeen = new Map<string, { seq: number; since: number }>();

  constructor(
    private readonly store: SignalRepository,
    readonly channel: SignalChannel,
    private readonly opts: DispatcherOptions = {},
  ) {
    this.pollMs = opts.pollMs ?? 500;
    this.batchSize = opts.batchSize ?? 100;
    this.now = opts.now ?? Date.now;
    this.random = opts.random ?? Math.random;
  }

  start(): void {
    if (!this.stopped) return;
    this.stopped = false;
    this.loop = this.store.registerChannel(this.channel.name, this.now(), this.opts.startAtEnd ?? false).then(
      () => this.run(),
      (e: Error) => console.error(`signals/${this.channel.name}: the channel could not be registered, nothing is delivered: ${e.message}`),
    );
  }

  /** Stop after the attempt in flight (if any) has finished. */
  async stop(): Promise<void> {
    this.stopped = true;
    this.wake();
    await this.loop;
    this.loop = null;
  }

  /** New rows are in the outbox (or the receiver came back): look now. */
  wake(): void {
    const w = this.wakeUp;
    this.wakeUp = null;
    w?.();
  }

  private async run(): Promise<void> {
    while (!this.stopped) {
      let worked = false;
      try {
        worked = await this.pass();
      } catch (e) {
        // storage trouble: log through onError-less path and keep the loop alive
        console.error(`signals/${this.channel.name}: delivery pass failed: ${(e as Error).message}`);
      }
      if (this.stopped) break;
      if (!worked) {
        await new Promise<void>((resolve) => {
          const timer = setTimeout(() => {
            this.wakeUp = null;
            resolve();
          }, this.pollMs);
          this.wakeUp = () => {
            clearTimeout(timer);
            resolve();
          };
        });
      }
    }
  }

  /** One pass over all units; true when something was delivered. */
  async pass(): Promise<boolean> {
    if (this.channel.isReady && !this.channel.isReady()) return false;
    const units = await this.store.units();
    const results = await Promise.all(units.map((u) => this.drainUnit(u)));
    const requeued = await this.retryRequeued();
    return results.some(Boolean) || requeued;
  }

  private async drainUnit(unit: string): Promise<boolean> {
    const name = this.channel.name;
    let worked = false;
    while (!this.stopped) {
      let expected = (await this.store.cursor(name, unit)) + 1;
      const rows = await this.store.pending(name, unit, this.batchSize);
      if (rows.length === 0) return worked;
      for (const row of rows) {
        if (this.stopped) return worked;
        if (this.channel.isReady && !this.channel.isReady()) return worked;
        if (row.unit_seq > expected && !this.passGap(unit, expected, row.unit_seq - 1)) return worked;
        expected = row.unit_seq + 1;
        const prev = await this.store.attempt(name, row.id);
        if (prev && prev.next_at > this.now()) return worked; // backing off: keep order, try later
        const env = envelopeOf(row);
        try {
          await this.channel.deliver(env);
          await this.store.markDelivered(name, row, this.now());
          this.stats.delivered++;
          worked = true;
          try {
            this.opts.onDelivered?.(name, env);
          } catch {
            // a listener's trouble is not a delivery failure
          }
        } catch (e) {
          const err = e instanceof Error ? e : new Error(String(e));
          const t = this.now();
          const policy = this.channel.backoff ?? DEFAULT_BACKOFF;
          const attempts = (prev?.attempts ?? 0) + 1;
          const dead = attempts >= this.channel.maxAttempts;
          this.stats.failed++;
          if (dead) {
            await this.store.markDead(name, row, err.message, t, attempts);
            this.stats.dead++;
          } else {
            await this.store.markFailed(name, row, err.message, t, t + backoffDelay(attempts, policy, this.random), attempts);
          }
          this.opts.onError?.(name, env, err, attempts, dead);
          if (!dead) return worked;
          worked = true;
        }
      }
    }
    return worked;
  }

  /** True when delivery may go on past the missing seqs from…to of a unit (the gap stood gapWaitMs). */
  private passGap(unit: string, from: number, to: number): boolean {
    const now = this.now();
    const seen = this.gapSeen.get(unit);
    if (!seen || seen.seq !== from) {
      this.gapSeen.set(unit, { seq: from, since: now });
      return false;
    }
    const waited = now - seen.since;
    if (waited < (this.opts.gapWaitMs ?? 5000)) return false;
    this.gapSeen.delete(unit);
    this.stats.gaps++;
    this.opts.onGap?.(this.channel.name, unit, from, to, waited);
    return true;
  }

  private async retryRequeued(): Promise<boolean> {
    let worked = false;
    for (const d of await this.store.requeued(this.channel.name)) {
      const row = await this.store.row(d.event_id);
      if (!row) continue;
      try {
        await this.channel.deliver(envelopeOf(row));
        await this.store.markDeadDelivered(this.channel.name, d.event_id, this.now());
        worked = true;
      } catch {
        break;
      }
    }
    return worked;
  }
}
