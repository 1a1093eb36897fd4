/**
 * One analyzer connection on /ingest: decodes frames, runs the hello handshake, hands entries to
 * the pipeline, answers with acks and error frames. Limits: maxPayload (ws closes with 1009 beyond
 * it), a message-rate token bucket and an error budget; a peer over them is closed as abusive.
 */
import { performance } from 'node:perf_hooks';
import type { WebSocket } from 'ws';
import { decodeSpectrumFrame } from '../../core/protocol/binary-frame.ts';
import {
  IngestProtocolError,
  MAX_MESSAGE_BYTES,
  PROTOCOL_VERSION,
  parseAnalyzerText,
  type ErrorMessage,
  type HelloMessage,
  type LogEntry,
  type WelcomeMessage,
} from '../../core/protocol/ingest-messages.ts';
import type { ServerConfig } from '../config.ts';
import type { Logger } from '../logger.ts';
import type { Metrics } from '../metrics.ts';
import type { AckSink, IngestPipeline, StreamState } from './pipeline.ts';

type Raw = { data: Buffer; binary: boolean; rt: number };

const MAX_BACKLOG = 10_000;

export class IngestConnection implements AckSink {
  private stream: StreamState | null = null;
  private busy = false;
  private readonly backlog: Raw[] = [];
  /** Messages per 100 ms step over the last second (a sliding window of ten steps). */
  private readonly steps = new Uint32Array(10);
  private stepAt = Math.floor(performance.now() / 100);
  private inWindow = 0;
  private errorTimes: number[] = [];
  private alive = true;
  private closed = false;
  private lastAckSent = -2;

  constructor(
    private readonly ws: WebSocket,
    readonly analyzer: string,
    readonly remoteAddress: string,
    private readonly pipeline: IngestPipeline,
    private readonly config: ServerConfig,
    private readonly metrics: Metrics,
    private readonly log: Logger,
  ) {
    ws.on('message', (data: Buffer, isBinary: boolean) => this.onMessage(data, isBinary));
    ws.on('pong', () => (this.alive = true));
    ws.on('close', () => this.onClose());
    ws.on('error', (e) => this.log.debug(`ingest ${analyzer}: socket error ${e.message}`));
  }

  /** Heartbeat: called every heartbeatMs; a peer that did not answer the last ping is dropped. */
  heartbeat(): void {
    if (!this.alive) {
      this.log.info(`ingest ${this.analyzer}: no pong within ${this.config.ingest.heartbeatMs} ms; dropping the connection`);
      this.ws.terminate();
      return;
    }
    this.alive = false;
    try {
      this.ws.ping();
    } catch {
      /* closing */
    }
  }

  sendAck(seq: number): void {
    if (this.closed || seq === this.lastAckSent) return;
    this.lastAckSent = seq;
    this.ws.send(`{"type":"ack","seq":${seq}}`);
  }

  close(code: number, reason: string): void {
    if (this.closed) return;
    this.ws.close(code, reason.slice(0, 120));
    // Nothing more is taken from a connection being closed (replaced by a newer one of the same
    // analyzer, server shutting down): what it still sends is not acked and is resent on the new one.
    this.closed = true;
  }

  private onClose() {
    this.closed = true;
    this.metrics.ingestConnections.dec();
    if (this.stream) this.pipeline.closeStream(this.stream, this);
  }

  private sendError(e: IngestProtocolError) {
    this.metrics.errors.inc({ code: e.code });
    if (this.closed) return;
    const m: ErrorMessage = { type: 'error', code: e.code, message: e.message };
    if (e.seq !== undefined) m.seq = e.seq;
    this.ws.send(JSON.stringify(m));
  }

  /**
   * At most ingest.maxMessagesPerSecond messages within any second, counted in 100 ms steps (a
   * sliding window: a burst cannot borrow from the second before it).
   */
  private takeToken(): boolean {
    const step = Math.floor(performance.now() / 100);
    const gone = Math.min(10, step - this.stepAt);
    for (let k = 1; k <= gone; k++) {
      const i = (this.stepAt + k) % 10;
      this.inWindow -= this.steps[i]!;
      this.steps[i] = 0;
    }
    this.stepAt = Math.max(this.stepAt, step);
    if (this.inWindow >= this.config.ingest.maxMessagesPerSecond) return false;
    this.steps[this.stepAt % 10]!++;
    this.inWindow++;
    return true;
  }

  /** The token of this connection was revoked: refuse everything from now on and close. */
  revoked(): void {
    if (this.closed) return;
    const msg = 'the analyzer token of this connection was revoked; nothing more is accepted on it';
    this.sendError(new IngestProtocolError('token-revoked', msg));
    this.log.warn(`ingest ${this.analyzer} (${this.remoteAddress}): closing: ${msg}`);
    this.ws.close(4401, 'analyzer token revoked');
    this.closed = true;
  }

  private abusive(code: 'rate-limited' | 'too-large', message: string, closeCode = 1008) {
    this.sendError(new IngestProtocolError(code, message));
    this.log.warn(`ingest ${this.analyzer} (${this.remoteAddress}): closing: ${message}`);
    this.ws.close(closeCode, message.slice(0, 120));
    this.closed = true;
  }

  private onMessage(data: Buffer, binary: boolean) {
    if (this.closed) return;
    const rt = performance.now();
    if (data.byteLength > MAX_MESSAGE_BYTES) {
      this.abusive('too-large', `message of ${data.byteLength} bytes; at most ${MAX_MESSAGE_BYTES} bytes (${MAX_MESSAGE_BYTES / 1024} KiB) are accepted`, 1009);
      return;
    }
    if (!this.takeToken()) {
      this.abusive('rate-limited', `more than ${this.config.ingest.maxMessagesPerSecond} messages per second`);
      return;
    }
    if (this.busy) {
      if (this.backlog.length >= MAX_BACKLOG) {
        this.abusive('rate-limited', `more than ${MAX_BACKLOG} messages sent while a hello was being answered or a batch-start committed`);
        return;
      }
      this.backlog.push({ data, binary, rt });
      return;
    }
    this.handle({ data, binary, rt });
  }

  private handle(m: Raw) {
    let entry: LogEntry | null = null;
    try {
      if (m.binary) {
        entry = decodeSpectrumFrame(new Uint8Array(m.data.buffer, m.data.byteOffset, m.data.byteLength));
      } else {
        const msg = parseAnalyzerText(m.data.toString('utf8'));
        if (msg.type === 'hello') {
          this.busy = true;
          void this.hello(msg).finally(() => this.drain());
          return;
        }
        entry = msg;
      }
      if (!this.stream) throw new IngestProtocolError('hello-required', 'send hello before any other message', entry.seq);
      const st = this.stream;
      const out = this.pipeline.accept(st, entry, m.rt);
      if (out === 'accepted' && entry.type === 'batch-start') {
        // Nothing more is taken from this connection until the start is durable: if its commit finds
        // the batch id taken meanwhile (an import by another process), only the start is refused.
        this.busy = true;
        void this.pipeline.whenStarted(st).then(
          () => undefined,
          // any other failure of that commit already closed the connection (the pipeline recovers)
          (e) => (e instanceof IngestProtocolError ? this.fail(e) : undefined),
        ).finally(() => this.drain());
        return;
      }
      if (out !== 'accepted') {
        // A resend: acked again only when it is the entry stored under its seq, else a conflict.
        const dup = entry;
        void this.pipeline.checkResend(st, dup).then(
          (conflict) => {
            if (conflict) return this.fail(conflict);
            if (this.stream !== st) return;
            this.lastAckSent = -2; // always answer a duplicate with an ack
            this.sendAck(st.lastCommitted);
          },
          (e) => this.fail(e),
        );
      }
    } catch (e) {
      this.fail(e);
    }
  }

  private fail(e: unknown) {
    if (!(e instanceof IngestProtocolError)) {
      this.log.error(`ingest ${this.analyzer}: internal error`, e);
      this.sendError(new IngestProtocolError('internal', `the server could not process this message: ${(e as Error)?.message ?? String(e)}`));
      return;
    }
    this.pipeline.refuse(this.stream, e);
    this.sendError(e);
    const now = performance.now();
    this.errorTimes.push(now);
    while (this.errorTimes.length && now - this.errorTimes[0]! > 10_000) this.errorTimes.shift();
    if (this.errorTimes.length > this.config.ingest.maxErrorsPer10s) {
      this.abusive('rate-limited', `more than ${this.config.ingest.maxErrorsPer10s} bad messages within 10 s`);
    }
  }

  private async hello(h: HelloMessage) {
    try {
      if (h.analyzer !== this.analyzer) {
        throw new IngestProtocolError('analyzer-mismatch', `hello names analyzer "${h.analyzer}", but the token belongs to analyzer "${this.analyzer}"`);
      }
      if (this.stream) this.pipeline.closeStream(this.stream, this);
      this.stream = null;
      const st = await this.pipeline.openStream(h.analyzer, h.boot, h.axis, h.instrument ?? null, this);
      if (this.closed) {
        this.pipeline.closeStream(st, this);
        return;
      }
      this.stream = st;
      const w: WelcomeMessage = { type: 'welcome', protocol: PROTOCOL_VERSION, analyzer: h.analyzer, boot: h.boot, resumeAfter: st.lastCommitted };
      this.lastAckSent = st.lastCommitted;
      this.ws.send(JSON.stringify(w));
    } catch (e) {
      this.fail(e);
    }
  }

  private drain() {
    this.busy = false;
    while (this.backlog.length && !this.busy && !this.closed) this.handle(this.backlog.shift()!);
  }
}
