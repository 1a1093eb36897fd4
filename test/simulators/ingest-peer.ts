/**
 * A small protocol-conformant ingest peer for testing the analyzer client: a ws server on
 * 127.0.0.1:0 that checks the Bearer token at upgrade, answers hello with welcome.resumeAfter,
 * persists log entries in order to an array per (analyzer, boot), acks the highest contiguous
 * persisted seq, ignores duplicates (acks them again) and answers bad entries with error frames.
 * It can drop a connection once mid-stream, refuse the first upgrades, and delay acks.
 */
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { WebSocketServer, type WebSocket } from 'ws';
import { decodeSpectrumFrame } from '../../core/protocol/binary-frame.ts';
import {
  IngestProtocolError,
  MAX_MESSAGE_BYTES,
  parseAnalyzerText,
  type LogEntry,
  type WelcomeMessage,
} from '../../core/protocol/ingest-messages.ts';

export interface PeerOptions {
  /** token → analyzer id */
  tokens: Record<string, string>;
  units?: string[];
  /** Terminate the connection (without acking) right after persisting this many entries in total, once. */
  dropAfterEntries?: number;
  /** Answer the first N upgrades with HTTP 503. */
  refuseFirst?: number;
  /** Send acks on a timer of this many ms instead of at once. */
  ackDelayMs?: number;
  /** Go silent (no acks, no pongs, ignore input, keep the TCP connection) after this many entries in total, once. */
  silentAfterEntries?: number;
}

export interface StreamLog {
  analyzer: string;
  boot: number;
  axis: number[];
  entries: LogEntry[];
  duplicates: number;
  maxInFlightSeen: number;
  openBatch: string | null;
}

export class IngestPeer {
  readonly streams = new Map<string, StreamLog>();
  upgrades = 0;
  connections = 0;
  dropped = 0;
  silenced = 0;
  private persistedTotal = 0;
  private http!: Server;
  private wss!: WebSocketServer;
  url = '';

  constructor(private readonly o: PeerOptions) {}

  async start(): Promise<void> {
    this.http = createServer();
    this.wss = new WebSocketServer({ noServer: true, maxPayload: MAX_MESSAGE_BYTES, perMessageDeflate: false, autoPong: false });
    this.http.on('upgrade', (req, socket, head) => {
      this.upgrades++;
      if (this.upgrades <= (this.o.refuseFirst ?? 0)) {
        socket.end('HTTP/1.1 503 Service Unavailable\r\nContent-Length: 0\r\n\r\n');
        return;
      }
      const auth = req.headers.authorization ?? '';
      const analyzer = auth.startsWith('Bearer ') ? this.o.tokens[auth.slice(7)] : undefined;
      if (!analyzer || !req.url?.startsWith('/ingest')) {
        socket.end('HTTP/1.1 401 Unauthorized\r\nContent-Length: 0\r\n\r\n');
        return;
      }
      this.wss.handleUpgrade(req, socket, head, (ws) => this.onConnection(ws, analyzer));
    });
    await new Promise<void>((r) => this.http.listen(0, '127.0.0.1', r));
    this.url = `ws://127.0.0.1:${(this.http.address() as AddressInfo).port}/ingest`;
  }

  async stop(): Promise<void> {
    for (const c of this.wss.clients) c.terminate();
    await new Promise<void>((r) => this.wss.close(() => r()));
    await new Promise<void>((r) => this.http.close(() => r()));
  }

  stream(analyzer: string): StreamLog[] {
    return [...this.streams.values()].filter((s) => s.analyzer === analyzer);
  }

  private onConnection(ws: WebSocket, analyzer: string): void {
    this.connections++;
    let log: StreamLog | null = null;
    let lastAckSent = -1;
    let ackTimer: NodeJS.Timeout | null = null;
    let silent = false;
    ws.on('ping', (d) => !silent && ws.pong(d));
    const lastSeq = () => (log ? log.entries.length - 1 : -1);
    const ack = () => {
      if (!log || lastSeq() === lastAckSent || ws.readyState !== ws.OPEN) return;
      lastAckSent = lastSeq();
      ws.send(JSON.stringify({ type: 'ack', seq: lastAckSent }));
    };
    const scheduleAck = () => {
      if (!this.o.ackDelayMs) return ack();
      if (!ackTimer) ackTimer = setTimeout(() => ((ackTimer = null), ack()), this.o.ackDelayMs);
    };
    const error = (e: IngestProtocolError) => ws.send(JSON.stringify({ type: 'error', code: e.code, message: e.message, ...(e.seq !== undefined ? { seq: e.seq } : {}) }));
    ws.on('close', () => ackTimer && clearTimeout(ackTimer));
    ws.on('message', (raw, isBinary) => {
      const data = raw as Buffer;
      if (silent) return;
      try {
        const msg = isBinary ? decodeSpectrumFrame(new Uint8Array(data.buffer, data.byteOffset, data.byteLength)) : parseAnalyzerText(data.toString());
        if (msg.type === 'hello') {
          if (msg.analyzer !== analyzer) throw new IngestProtocolError('analyzer-mismatch', `token belongs to ${analyzer}, hello names ${msg.analyzer}`);
          const key = `${msg.analyzer}/${msg.boot}`;
          log = this.streams.get(key) ?? { analyzer, boot: msg.boot, axis: msg.axis, entries: [], duplicates: 0, maxInFlightSeen: 0, openBatch: null };
          this.streams.set(key, log);
          const w: WelcomeMessage = { type: 'welcome', protocol: 1, analyzer, boot: msg.boot, resumeAfter: lastSeq() };
          lastAckSent = lastSeq();
          ws.send(JSON.stringify(w));
          return;
        }
        if (!log) throw new IngestProtocolError('hello-required', 'send hello first', msg.seq);
        log.maxInFlightSeen = Math.max(log.maxInFlightSeen, msg.seq - lastAckSent);
        if (msg.seq <= lastSeq()) {
          log.duplicates++;
          ack();
          return;
        }
        if (msg.seq !== lastSeq() + 1) throw new IngestProtocolError('seq-gap', `expected seq ${lastSeq() + 1}, got ${msg.seq}`, msg.seq);
        // Time may not go backwards within a batch.
        const prev = log.entries[log.entries.length - 1];
        if (prev && log.openBatch && msg.t < prev.t) throw new IngestProtocolError('time-backwards', `t ${msg.t} is before ${prev.t}`, msg.seq);
        if (msg.type === 'batch-start') {
          if (log.openBatch) throw new IngestProtocolError('batch-already-open', `batch ${log.openBatch} is open`, msg.seq);
          if (this.o.units && !this.o.units.includes(msg.unit)) throw new IngestProtocolError('unknown-unit', `unit ${msg.unit} is not configured`, msg.seq);
          log.openBatch = msg.batch;
        } else if (msg.type === 'batch-end') {
          if (log.openBatch !== msg.batch) throw new IngestProtocolError('batch-mismatch', `batch-end for ${msg.batch}, open is ${log.openBatch}`, msg.seq);
          log.openBatch = null;
        } else if (msg.type === 'spectrum') {
          if (!log.openBatch) throw new IngestProtocolError('no-open-batch', 'spectrum outside a batch', msg.seq);
          if (msg.values.length !== log.axis.length) throw new IngestProtocolError('wrong-length', `${msg.values.length} values for a ${log.axis.length}-point axis`, msg.seq);
        }
        log.entries.push(msg);
        this.persistedTotal++;
        if (this.o.dropAfterEntries !== undefined && this.persistedTotal === this.o.dropAfterEntries) {
          this.dropped++;
          ws.terminate(); // persisted but never acked: the client must learn it from welcome.resumeAfter
          return;
        }
        if (this.o.silentAfterEntries !== undefined && this.persistedTotal === this.o.silentAfterEntries) {
          this.silenced++;
          silent = true; // a half-open connection: the client must notice by itself
          return;
        }
        scheduleAck();
      } catch (e) {
        if (e instanceof IngestProtocolError) error(e);
        else throw e;
      }
    });
  }
}
