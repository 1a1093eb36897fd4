/**
 * The audit trail's anchor sent out at a set interval. A hash chain shows every record edited in
 * place, but not a trail cut back at its end with its head rewritten, nor one rewritten as a whole:
 * only a copy of the head kept where the database's owner cannot reach shows those. Every
 * `signals.auditAnchorEveryMs` the current head `SEQ:HASH` goes to the server log and to every
 * configured channel (at start to the log only: a receiver is not sent a message per restart) — MQTT (retained), webhooks, OPC UA — so that a historian,
 * a broker's subscribers or the log collector keep it; `tideline audit verify --anchor SEQ:HASH`
 * checks the trail against any of them (docs/security.md).
 *
 * Best effort on purpose: an anchor that does not get through is replaced by the next one, so it is
 * not written to the outbox (which promises every event once in order per unit) and not retried.
 */
import type { AuditAnchor } from '../audit/types.ts';

/** What each channel receives: the head as `SEQ:HASH` and its parts, and when it was taken. */
export interface AnchorMessage {
  type: 'audit-anchor';
  /** `SEQ:HASH` as `audit verify --anchor` takes it. */
  anchor: string;
  seq: number;
  hash: string;
  /** Server time the anchor was taken, ms since the Unix epoch (UTC). */
  t: number;
}

/** A channel that can carry an anchor (each says how: retained topic, POST, variable). */
export interface AnchorSink {
  readonly name: string;
  sendAnchor(m: AnchorMessage): Promise<void>;
}

export interface AnchorPublisherOptions {
  everyMs: number;
  now: () => number;
  /** The current head, or null while the trail is empty. */
  head: () => Promise<AuditAnchor | null>;
  sinks: AnchorSink[];
  log: { info(msg: string): void; warn(msg: string): void };
}

export function anchorMessage(a: AuditAnchor, t: number): AnchorMessage {
  return { type: 'audit-anchor', anchor: `${a.seq}:${a.hash}`, seq: a.seq, hash: a.hash, t };
}

/** Logs the anchor now, then sends it every `everyMs` (0: never). Returns a stop function. */
export function startAnchorPublisher(o: AnchorPublisherOptions): { publishNow(): Promise<void>; stop(): void } {
  let stopped = false;
  const publishNow = async (sinks = o.sinks) => {
    if (stopped) return;
    let head: AuditAnchor | null;
    try {
      head = await o.head();
    } catch (e) {
      o.log.warn(`audit anchor: the chain head could not be read: ${(e as Error).message}`);
      return;
    }
    if (!head) return;
    const m = anchorMessage(head, o.now());
    // the log line is an anchor of its own where logs are collected off the machine
    o.log.info(`audit anchor ${m.anchor} (keep it outside the server; npm run tideline -- audit verify --anchor ${m.anchor})`);
    await Promise.all(
      sinks.map((s) =>
        s.sendAnchor(m).catch((e: Error) => o.log.warn(`audit anchor ${m.anchor} not sent to ${s.name}: ${e.message} (the next one follows in ${Math.round(o.everyMs / 1000)} s)`)),
      ),
    );
  };
  if (o.everyMs <= 0) return { publishNow: () => publishNow(), stop: () => void (stopped = true) };
  const timer = setInterval(() => void publishNow(), o.everyMs);
  timer.unref();
  void publishNow([]);
  return {
    publishNow: () => publishNow(),
    stop: () => {
      stopped = true;
      clearInterval(timer);
    },
  };
}
