/** A /live connection that subscribes to one scope and reconnects with back-off. */
import type { LiveClientMessage, LiveScope, LiveServerMessage } from '../../../core/api/live.ts';

export type ConnectionState = 'connecting' | 'open' | 'closed';

export interface LiveSocketOptions {
  scope: LiveScope;
  maxResults?: number;
  onMessage(m: LiveServerMessage): void;
  onState?(s: ConnectionState): void;
}

let subCounter = 0;

export class LiveSocket {
  private ws: WebSocket | null = null;
  private closed = false;
  private retry = 0;
  private timer: ReturnType<typeof setTimeout> | null = null;
  private pingTimer: ReturnType<typeof setInterval> | null = null;
  readonly subscriptionId = `s${++subCounter}`;

  constructor(private opts: LiveSocketOptions) {
    this.connect();
  }

  private connect(): void {
    if (this.closed) return;
    this.opts.onState?.('connecting');
    const proto = location.protocol === 'https:' ? 'wss:' : 'ws:';
    const ws = new WebSocket(`${proto}//${location.host}/live`);
    this.ws = ws;
    ws.onopen = () => {
      this.retry = 0;
      this.opts.onState?.('open');
      this.send({ type: 'subscribe', id: this.subscriptionId, scope: this.opts.scope, maxResults: this.opts.maxResults });
      this.pingTimer = setInterval(() => this.send({ type: 'ping', t: Date.now() }), 20_000);
    };
    ws.onmessage = (ev) => {
      let m: LiveServerMessage;
      try {
        m = JSON.parse(String(ev.data)) as LiveServerMessage;
      } catch {
        return;
      }
      this.opts.onMessage(m);
    };
    ws.onclose = () => {
      if (this.pingTimer) clearInterval(this.pingTimer);
      this.pingTimer = null;
      this.ws = null;
      this.opts.onState?.('closed');
      if (this.closed) return;
      const delay = Math.min(15_000, 500 * 2 ** this.retry++);
      this.timer = setTimeout(() => this.connect(), delay);
    };
  }

  /** Ask for a fresh snapshot (after lost messages). */
  resubscribe(): void {
    this.send({ type: 'subscribe', id: this.subscriptionId, scope: this.opts.scope, maxResults: this.opts.maxResults });
  }

  private send(m: LiveClientMessage): void {
    if (this.ws && this.ws.readyState === WebSocket.OPEN) this.ws.send(JSON.stringify(m));
  }

  close(): void {
    this.closed = true;
    if (this.timer) clearTimeout(this.timer);
    if (this.pingTimer) clearInterval(this.pingTimer);
    this.ws?.close();
  }
}
