/**
 * Webhook channel: each outbox event is POSTed as JSON to one URL, signed (webhook-signature.ts),
 * with the event id as idempotency key. Only a 2xx answer counts as delivered; anything else (or
 * no answer within the timeout) is retried with backoff, and dead-lettered after maxAttempts.
 */
import { randomUUID } from 'node:crypto';
import type { AnchorMessage, AnchorSink } from './audit-anchor.ts';
import type { BackoffPolicy } from './backoff.ts';
import type { SignalChannel } from './dispatcher.ts';
import type { SignalEnvelope } from './outbox-store.ts';
import { EVENT_ID_HEADER, IDEMPOTENCY_HEADER, SIGNATURE_HEADER, signatureHeader } from './webhook-signature.ts';

export interface WebhookConfig {
  /** Short name, used in the channel key `webhook:<name>` and in the dead-letter list. */
  name: string;
  url: string;
  secret: string;
  /** Only these event types (default: all). */
  types?: string[];
  maxAttempts: number;
  backoff: BackoffPolicy;
  timeoutMs: number;
}

export class WebhookChannel implements SignalChannel, AnchorSink {
  readonly name: string;
  readonly maxAttempts: number;
  readonly backoff: BackoffPolicy;

  constructor(
    private readonly cfg: WebhookConfig,
    private readonly now: () => number = Date.now,
  ) {
    if (!/^https?:\/\//.test(cfg.url)) throw new Error(`webhook '${cfg.name}': url must start with http:// or https://, got '${cfg.url}'`);
    if (!cfg.secret || cfg.secret.length < 16) throw new Error(`webhook '${cfg.name}': secret must be at least 16 characters`);
    this.name = `webhook:${cfg.name}`;
    this.maxAttempts = cfg.maxAttempts;
    this.backoff = cfg.backoff;
  }

  async deliver(event: SignalEnvelope): Promise<void> {
    if (this.cfg.types && !this.cfg.types.includes(event.type)) return; // filtered out: counts as done
    await this.post(event.id, JSON.stringify(event));
  }

  /**
   * The audit trail's anchor (audit-anchor.ts), in the envelope's shape with `unit` and `seq` null:
   * it is no outbox event (no per-unit sequence, no retry; the next anchor replaces it).
   */
  async sendAnchor(m: AnchorMessage): Promise<void> {
    if (this.cfg.types && !this.cfg.types.includes(m.type)) return;
    const id = randomUUID();
    await this.post(id, JSON.stringify({ id, unit: null, seq: null, type: m.type, createdAt: m.t, payload: { anchor: m.anchor, seq: m.seq, hash: m.hash } }));
  }

  private async post(id: string, body: string): Promise<void> {
    const res = await fetch(this.cfg.url, {
      method: 'POST',
      headers: {
        'content-type': 'application/json',
        [SIGNATURE_HEADER]: signatureHeader(this.cfg.secret, body, this.now()),
        [IDEMPOTENCY_HEADER]: id,
        [EVENT_ID_HEADER]: id,
        'user-agent': 'tideline-signals',
      },
      body,
      signal: AbortSignal.timeout(this.cfg.timeoutMs),
    });
    // drain the body so the connection can be reused
    await res.arrayBuffer().catch(() => undefined);
    if (res.status < 200 || res.status >= 300) throw new Error(`HTTP ${res.status} from ${this.cfg.url}`);
  }
}
