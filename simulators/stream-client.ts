/**
 * A streaming analyzer client speaking Tideline ingest protocol v1 (core/protocol/).
 *
 * The analyzer keeps an ordered log: batch-start, spectra and batch-end each take the next `seq`
 * of its boot epoch. Entries stay in the log until the server acks them; at most `window` entries
 * are in flight (sent, not yet acked). When the connection drops the client reconnects with
 * exponential backoff and jitter, says hello again, reads `welcome.resumeAfter` and resends every
 * entry after it. Spectra go as binary frames (default) or JSON.
 */
import WebSocket from 'ws';
import { encodeSpectrumFrame } from '../core/protocol/binary-frame.ts';
import {
  encodeSpectrumJson,
  NE107_CATEGORIES,
  PROTOCOL_VERSION,
  type AnalyzerStatusMessage,
  type BatchEndMessage,
  type BatchStartMessage,
  type HelloMessage,
  type IngestErrorCode,
  type Ne107Category,
  type ServerToAnalyzerMessage,
} from '../core/protocol/ingest-messages.ts';
import type { SimulatedBatch } from './batch-types.ts';
import { Rng } from './prng.ts';

export interface AnalyzerClientOptions {
  /** ws:// or wss:// URL of the server's /ingest endpoint. */
  url: string;
  /** The analyzer's token, sent as `Authorization: Bearer <token>` at upgrade. */
  token: string;
  analyzer: string;
  /** Wavelength axis, nm (sent in hello). */
  axis: number[];
  /** Spectra as binary frames (default true) or JSON. */
  binary?: boolean;
  /** Boot epoch; defaults to the wall-clock time at construction, ms. */
  boot?: number;
  /** Where the process clock starts (ms epoch) for 'process' timestamps; default: the wall clock at the first batch. */
  processClockStart?: number;
  /** Maximum entries sent but not yet acked (default 64). */
  window?: number;
  instrument?: string;
  /** Reconnect backoff: first delay and cap, ms (defaults 200 and 10 000). */
  backoff?: { initialMs?: number; maxMs?: number };
  /**
   * Liveness: ping the server this often, ms, and drop the connection (then reconnect and resend)
   * when nothing at all has been heard from it for 2.5 × this long — a half-open TCP connection
   * would otherwise hold the stream forever. 0 disables. Default 10 000.
   */
  heartbeatMs?: number;
  /** Progress and problems in words (default: silent). */
  log?: (line: string) => void;
  /** Extra options for the ws client (e.g. TLS settings). */
  wsOptions?: WebSocket.ClientOptions;
}

export interface SendBatchOptions {
  /** ×N real time; 0 sends as fast as acks allow. */
  speed: number;
  /** Unit named in batch-start (default: the batch's own unit). */
  unit?: string;
  /** Batch id sent (default: the batch's own id). */
  batchId?: string;
  product?: string;
  /**
   * 'process' (default): timestamps continue the analyzer's process clock, which starts at the wall
   * clock when the first batch is sent and advances by process time (so ×60 streams an hour of
   * process in a minute, stamped as an hour). 'original': the simulated batch's own times.
   */
  timestamps?: 'process' | 'original';
  /**
   * With 'process' timestamps: never send a spectrum before the wall clock reaches its time stamp,
   * so no time is dated in the future. A process clock started in the past (processClockStart)
   * replays at ×speed until it reaches the present, then in real time.
   */
  notAheadOfWallClock?: boolean;
  /** When aborted, no more spectra are sent: the batch ends at once ("stopped by operator") and is flushed. */
  signal?: AbortSignal;
  /**
   * Analyzer status windows (NAMUR NE 107), in process minutes after batch start: at `fromMin` the
   * analyzer reports `status` (message analyzer-status), at `toMin` 'good' again. In 'function-check'
   * (e.g. probe cleaning) it sends no spectra inside the window.
   */
  statusWindows?: StatusWindow[];
}

export interface StatusWindow {
  status: Ne107Category;
  fromMin: number;
  toMin: number;
  code?: string;
}

/** Parse `STATUS@FROM-TO[:code]`, e.g. `function-check@20-25:probe-cleaning` (minutes after batch start). */
export function parseStatusWindow(spec: string): StatusWindow {
  const m = /^([a-z-]+)@(\d+(?:\.\d+)?)-(\d+(?:\.\d+)?)(?::([A-Za-z0-9._-]{1,64}))?$/.exec(spec);
  if (!m) throw new AnalyzerClientError(`status window "${spec}" must look like STATUS@FROM-TO[:code], e.g. function-check@20-25:probe-cleaning`);
  const status = m[1]! as Ne107Category;
  if (!(NE107_CATEGORIES as readonly string[]).includes(status) || status === 'good') {
    throw new AnalyzerClientError(`status window "${spec}": status must be one of ${NE107_CATEGORIES.filter((c) => c !== 'good').join(', ')}`);
  }
  const fromMin = Number(m[2]);
  const toMin = Number(m[3]);
  if (!(toMin > fromMin)) throw new AnalyzerClientError(`status window "${spec}": the end (${toMin} min) must come after the start (${fromMin} min)`);
  return { status, fromMin, toMin, ...(m[4] ? { code: m[4] } : {}) };
}

export interface SentBatch {
  batch: string;
  /** Spectra sent (drop-outs and spectra after a stop are not). */
  spectra: number;
  /** True when the signal stopped the batch early. */
  stopped: boolean;
  /** seq of the batch-end. */
  endSeq: number;
}

export interface ClientStats {
  connected: boolean;
  /** Highest seq acked by the server (−1 before the first ack). */
  acked: number;
  /** Next seq to be assigned. */
  nextSeq: number;
  /** Entries waiting for an ack (sent or not). */
  pending: number;
  inFlight: number;
  sent: number;
  resent: number;
  spectra: number;
  bytesSent: number;
  connects: number;
  reconnects: number;
  errors: { code: string; message: string; seq?: number }[];
}

interface Entry {
  seq: number;
  data: string | Uint8Array;
}

/** Server error codes after which the stream can go on (the server closes; we reconnect). */
const TRANSIENT_CODES = new Set<IngestErrorCode>(['rate-limited', 'internal']);

export class AnalyzerClientError extends Error {
  constructor(
    message: string,
    readonly code?: string,
  ) {
    super(message);
    this.name = 'AnalyzerClientError';
  }
}

/** Sleep for ms, or less if the signal aborts. */
const sleep = (ms: number, signal?: AbortSignal) =>
  new Promise<void>((resolve) => {
    if (signal?.aborted) return resolve();
    const done = () => {
      clearTimeout(timer);
      signal?.removeEventListener('abort', done);
      resolve();
    };
    const timer = setTimeout(done, ms);
    signal?.addEventListener('abort', done, { once: true });
  });

export class AnalyzerClient {
  readonly boot: number;
  private readonly opts: Required<Pick<AnalyzerClientOptions, 'binary' | 'window'>> & AnalyzerClientOptions;
  private readonly log: (line: string) => void;
  private readonly jitter: Rng;
  private ws: WebSocket | null = null;
  private ready = false;
  private closing = false;
  private failure: AnalyzerClientError | null = null;
  private pending: Entry[] = [];
  private nextSeq = 0;
  private acked = -1;
  private sentUpTo = -1;
  private maxSentEver = -1;
  private attempt = 0;
  private reconnectTimer: NodeJS.Timeout | null = null;
  private waiters: { seq: number; resolve: () => void; reject: (e: Error) => void }[] = [];
  private startWaiters: { resolve: () => void; reject: (e: Error) => void }[] = [];
  private closeWaiters: (() => void)[] = [];
  private processClock: number | null = null;
  private sending = false;
  private lastHeard = 0;
  private heartbeat: NodeJS.Timeout | null = null;
  private lastT = 0;
  private readonly counters = { sent: 0, resent: 0, spectra: 0, bytesSent: 0, connects: 0, reconnects: 0 };
  private readonly errors: ClientStats['errors'] = [];

  constructor(opts: AnalyzerClientOptions) {
    if (!/^wss?:\/\//.test(opts.url)) throw new AnalyzerClientError(`url "${opts.url}" must start with ws:// or wss://`);
    if (!opts.token) throw new AnalyzerClientError('an analyzer token is required');
    if (!/^[A-Za-z0-9._:-]{1,128}$/.test(opts.analyzer)) throw new AnalyzerClientError(`analyzer id "${opts.analyzer}": use 1–128 letters, digits and . _ : -`);
    const window = opts.window ?? 64;
    if (!Number.isInteger(window) || window < 1) throw new AnalyzerClientError(`window ${window} must be a positive integer`);
    this.opts = { ...opts, binary: opts.binary ?? true, window };
    this.boot = opts.boot ?? Date.now();
    this.log = opts.log ?? (() => {});
    this.jitter = new Rng(this.boot % 0x100000000);
  }

  /** Connect and say hello; resolves at the first welcome. Rejects if the server refuses us. */
  start(): Promise<void> {
    if (this.failure) return Promise.reject(this.failure);
    if (this.ready) return Promise.resolve();
    const p = new Promise<void>((resolve, reject) => this.startWaiters.push({ resolve, reject }));
    if (!this.ws && !this.reconnectTimer) this.connect();
    return p;
  }

  /**
   * Stream one batch: batch-start, its spectra (drop-outs skipped) paced at ×speed, batch-end;
   * resolves when all are acked. Rejects if the server refuses the stream.
   */
  async sendBatch(batch: SimulatedBatch, opts: SendBatchOptions): Promise<SentBatch> {
    if (!(opts.speed >= 0) || !Number.isFinite(opts.speed)) throw new AnalyzerClientError(`speed ${opts.speed} must be a finite number ≥ 0 (0 = as fast as acks allow)`);
    if (batch.axis.length !== this.opts.axis.length) {
      throw new AnalyzerClientError(`batch ${batch.id} has ${batch.axis.length} wavelengths; this analyzer's axis has ${this.opts.axis.length}`);
    }
    if (this.sending) throw new AnalyzerClientError('a batch is already being sent on this analyzer; await it first');
    this.sending = true;
    try {
      return await this.sendBatchInner(batch, opts);
    } finally {
      this.sending = false;
    }
  }

  private async sendBatchInner(batch: SimulatedBatch, opts: SendBatchOptions): Promise<SentBatch> {
    await this.start();
    const original = opts.timestamps === 'original';
    if (this.processClock === null) this.processClock = this.opts.processClockStart ?? Date.now();
    const base = Math.max(this.processClock, this.lastT + 1);
    if (opts.notAheadOfWallClock && !original && base > Date.now() + 1000) {
      this.log(`process clock ${new Date(base).toISOString()} is ahead of the wall clock (earlier data dated ahead); waiting until the wall clock reaches it before batch ${batch.id}`);
    }
    if (opts.notAheadOfWallClock && !original && base > Date.now()) await sleep(base - Date.now(), opts.signal);
    const tOf = (i: number) => (original ? batch.times[i]! : base + (batch.times[i]! - batch.start));
    const id = opts.batchId ?? batch.id;
    const dropped = new Set(batch.truth.dropped);
    const start: BatchStartMessage = { type: 'batch-start', seq: 0, t: tOf(0), unit: opts.unit ?? batch.unit, batch: id, product: opts.product ?? batch.product };
    this.enqueue((seq) => JSON.stringify({ ...start, seq }), start.t);
    const wallStart = Date.now();
    let sent = 0;
    let last = 0;
    let stopped = false;
    const windows = (opts.statusWindows ?? []).map((w) => ({ ...w, state: 0 as 0 | 1 | 2 }));
    for (let i = 0; i < batch.spectra.length; i++) {
      this.throwIfFailed();
      if (opts.speed > 0 || (opts.notAheadOfWallClock && !original)) {
        const paced = opts.speed > 0 ? wallStart + (batch.times[i]! - batch.start) / opts.speed : 0;
        const due = opts.notAheadOfWallClock && !original ? Math.max(paced, tOf(i)) : paced;
        const wait = due - Date.now();
        if (wait > 0) await sleep(wait, opts.signal);
        this.throwIfFailed();
      }
      if (opts.signal?.aborted) {
        stopped = true;
        break;
      }
      last = i;
      const min = (batch.times[i]! - batch.start) / 60_000;
      let quiet = false;
      for (const w of windows) {
        const next = min >= w.toMin ? 2 : min >= w.fromMin ? 1 : 0;
        if (next === w.state) {
          if (next === 1 && w.status === 'function-check') quiet = true;
          continue;
        }
        const status = next === 1 ? w.status : 'good';
        const m: Omit<AnalyzerStatusMessage, 'seq'> = { type: 'analyzer-status', t: tOf(i), status, ...(next === 1 && w.code ? { code: w.code } : {}) };
        this.enqueue((seq) => JSON.stringify({ ...m, seq }), m.t);
        w.state = next;
        if (next === 1 && w.status === 'function-check') quiet = true;
      }
      if (quiet || dropped.has(i)) continue;
      const t = tOf(i);
      const values = batch.spectra[i]!;
      this.enqueue((seq) => (this.opts.binary ? encodeSpectrumFrame(seq, t, values) : encodeSpectrumJson(seq, t, values)), t);
      this.counters.spectra++;
      sent++;
    }
    // The simulated control system's own words: it stops the batch when the simulated process
    // reaches its target (or at the maximum time). It cannot know whether Tideline called the
    // endpoint, so it does not claim one; the server states the end against its endpoint record.
    const reason = stopped
      ? 'stopped by operator'
      : batch.truth.endpointIndex === null
        ? 'stopped at the maximum batch time'
        : 'stopped by the control system (the simulated process reached its target)';
    const end: BatchEndMessage = { type: 'batch-end', seq: 0, t: tOf(last), batch: id, reason };
    const endSeq = this.enqueue((seq) => JSON.stringify({ ...end, seq }), end.t);
    if (!original) this.processClock = tOf(last) + 1;
    await this.flush(endSeq);
    return { batch: id, spectra: sent, stopped, endSeq };
  }

  /** The time stamp the next batch sent with 'process' timestamps starts at (ms epoch). */
  nextProcessTime(): number {
    return Math.max(this.processClock ?? this.opts.processClockStart ?? Date.now(), this.lastT + 1);
  }

  /** Resolves when every entry up to `seq` (default: all so far) has been acked. */
  flush(seq = this.nextSeq - 1): Promise<void> {
    if (this.failure) return Promise.reject(this.failure);
    if (seq <= this.acked) return Promise.resolve();
    return new Promise((resolve, reject) => this.waiters.push({ seq, resolve, reject }));
  }

  /** Close the connection without waiting for acks (call flush() first to drain). */
  close(): Promise<void> {
    this.closing = true;
    this.stopHeartbeat();
    if (this.reconnectTimer) clearTimeout(this.reconnectTimer);
    this.reconnectTimer = null;
    const err = new AnalyzerClientError('client closed');
    for (const w of this.startWaiters.splice(0)) w.reject(err);
    for (const w of this.waiters.splice(0)) w.reject(err);
    const ws = this.ws;
    if (!ws || ws.readyState === WebSocket.CLOSED) return Promise.resolve();
    return new Promise((resolve) => {
      this.closeWaiters.push(resolve);
      if (ws.readyState === WebSocket.CONNECTING) ws.terminate();
      else ws.close(1000, 'analyzer closing');
    });
  }

  stats(): ClientStats {
    return {
      connected: this.ready,
      acked: this.acked,
      nextSeq: this.nextSeq,
      pending: this.pending.length,
      inFlight: Math.max(0, this.sentUpTo - this.acked),
      ...this.counters,
      errors: this.errors.slice(),
    };
  }

  /** Drop the current connection as a network fault would (for tests and drills). */
  dropConnection(): void {
    this.ws?.terminate();
  }

  // ---- internals ------------------------------------------------------------------------------

  private throwIfFailed(): void {
    if (this.failure) throw this.failure;
    if (this.closing) throw new AnalyzerClientError('client closed');
  }

  private enqueue(make: (seq: number) => string | Uint8Array, t: number): number {
    this.throwIfFailed();
    const seq = this.nextSeq++;
    this.pending.push({ seq, data: make(seq) });
    this.lastT = Math.max(this.lastT, t);
    this.pump();
    return seq;
  }

  private pump(): void {
    const ws = this.ws;
    if (!ws || !this.ready || ws.readyState !== WebSocket.OPEN) return;
    while (this.pending.length && this.sentUpTo - this.acked < this.opts.window) {
      const idx = this.sentUpTo + 1 - this.pending[0]!.seq;
      const e = this.pending[idx];
      if (!e) break;
      ws.send(e.data);
      this.sentUpTo = e.seq;
      this.counters.sent++;
      this.counters.bytesSent += typeof e.data === 'string' ? Buffer.byteLength(e.data) : e.data.byteLength;
      if (e.seq <= this.maxSentEver) this.counters.resent++;
      else this.maxSentEver = e.seq;
    }
  }

  private connect(): void {
    this.counters.connects++;
    const ws = new WebSocket(this.opts.url, {
      perMessageDeflate: false,
      handshakeTimeout: 10_000,
      ...this.opts.wsOptions,
      headers: { ...(this.opts.wsOptions?.headers ?? {}), Authorization: `Bearer ${this.opts.token}` },
    });
    this.ws = ws;
    const heard = () => (this.lastHeard = Date.now());
    ws.on('ping', heard);
    ws.on('pong', heard);
    ws.on('open', () => {
      heard();
      this.startHeartbeat(ws);
      const hello: HelloMessage = {
        type: 'hello',
        protocol: PROTOCOL_VERSION,
        analyzer: this.opts.analyzer,
        boot: this.boot,
        axis: this.opts.axis,
        ...(this.opts.instrument ? { instrument: this.opts.instrument } : {}),
      };
      ws.send(JSON.stringify(hello));
    });
    ws.on('message', (data, isBinary) => {
      heard();
      if (isBinary) return this.log('server sent a binary message; ignored');
      let m: ServerToAnalyzerMessage;
      try {
        m = JSON.parse(data.toString()) as ServerToAnalyzerMessage;
      } catch {
        return this.log('server sent text that is not JSON; ignored');
      }
      this.onServerMessage(m);
    });
    ws.on('unexpected-response', (_req, res) => {
      const status = res.statusCode ?? 0;
      if (status === 401 || status === 403) {
        this.fail(new AnalyzerClientError(`the server refused analyzer ${this.opts.analyzer} at upgrade (HTTP ${status}): check the token`, `http-${status}`));
      } else {
        this.log(`upgrade answered HTTP ${status}; will retry`);
      }
      ws.terminate();
    });
    ws.on('error', (e) => this.log(`connection error: ${e.message}`));
    ws.on('close', () => this.onClose(ws));
  }

  private onServerMessage(m: ServerToAnalyzerMessage): void {
    if (m.type === 'welcome') {
      if (m.boot !== this.boot || m.analyzer !== this.opts.analyzer) {
        this.fail(new AnalyzerClientError(`welcome is for ${m.analyzer} boot ${m.boot}, not ${this.opts.analyzer} boot ${this.boot}`, 'analyzer-mismatch'));
        return;
      }
      const r = m.resumeAfter;
      if (r < this.acked) this.log(`server resumes after ${r} but had acked ${this.acked}: entries ${r + 1}…${this.acked} cannot be resent`);
      if (r >= this.nextSeq) this.nextSeq = r + 1; // a restarted client reusing its boot epoch
      this.onAck(r);
      this.sentUpTo = Math.max(r, this.acked);
      if (this.attempt > 0 || this.counters.connects > 1) this.log(`reconnected; resending after seq ${this.sentUpTo}`);
      this.attempt = 0;
      this.ready = true;
      for (const w of this.startWaiters.splice(0)) w.resolve();
      this.pump();
    } else if (m.type === 'ack') {
      this.onAck(m.seq);
      this.pump();
    } else if (m.type === 'error') {
      this.errors.push({ code: m.code, message: m.message, ...(m.seq !== undefined ? { seq: m.seq } : {}) });
      if (this.errors.length > 100) this.errors.shift();
      this.log(`server error ${m.code}${m.seq !== undefined ? ` at seq ${m.seq}` : ''}: ${m.message}`);
      if (!TRANSIENT_CODES.has(m.code)) this.fail(new AnalyzerClientError(`server rejected the stream: ${m.code}: ${m.message}`, m.code));
    }
  }

  private onAck(seq: number): void {
    if (seq <= this.acked) return;
    this.acked = seq;
    let drop = 0;
    while (drop < this.pending.length && this.pending[drop]!.seq <= seq) drop++;
    if (drop) this.pending.splice(0, drop);
    const keep: typeof this.waiters = [];
    for (const w of this.waiters) {
      if (w.seq <= seq) w.resolve();
      else keep.push(w);
    }
    this.waiters = keep;
  }

  private startHeartbeat(ws: WebSocket): void {
    this.stopHeartbeat();
    const every = this.opts.heartbeatMs ?? 10_000;
    if (!(every > 0)) return;
    const openedAt = Date.now();
    this.heartbeat = setInterval(() => {
      if (this.ws !== ws || ws.readyState !== WebSocket.OPEN) return;
      if (!this.ready && Date.now() - openedAt > 2.5 * every) {
        this.log(`no welcome within ${Date.now() - openedAt} ms of hello; dropping the connection`);
        ws.terminate();
        return;
      }
      if (Date.now() - this.lastHeard > 2.5 * every) {
        this.log(`nothing heard from the server for ${Date.now() - this.lastHeard} ms; dropping the connection`);
        ws.terminate();
        return;
      }
      ws.ping();
    }, every);
    this.heartbeat.unref();
  }

  private stopHeartbeat(): void {
    if (this.heartbeat) clearInterval(this.heartbeat);
    this.heartbeat = null;
  }

  private onClose(ws: WebSocket): void {
    if (this.ws !== ws) return;
    this.stopHeartbeat();
    this.ws = null;
    this.ready = false;
    if (this.closing || this.failure) {
      for (const r of this.closeWaiters.splice(0)) r();
      return;
    }
    const initial = this.opts.backoff?.initialMs ?? 200;
    const max = this.opts.backoff?.maxMs ?? 10_000;
    // Exponential backoff with "equal jitter": half fixed, half random.
    const cap = Math.min(max, initial * 2 ** this.attempt);
    const delay = cap / 2 + this.jitter.uniform() * (cap / 2);
    this.attempt++;
    this.counters.reconnects++;
    this.log(`connection lost; reconnecting in ${Math.round(delay)} ms (attempt ${this.attempt})`);
    this.reconnectTimer = setTimeout(() => {
      this.reconnectTimer = null;
      if (!this.closing && !this.failure) this.connect();
    }, delay);
  }

  private fail(e: AnalyzerClientError): void {
    if (this.failure) return;
    this.failure = e;
    this.stopHeartbeat();
    this.log(e.message);
    for (const w of this.startWaiters.splice(0)) w.reject(e);
    for (const w of this.waiters.splice(0)) w.reject(e);
    if (this.reconnectTimer) clearTimeout(this.reconnectTimer);
    this.reconnectTimer = null;
    const ws = this.ws;
    if (ws && ws.readyState !== WebSocket.CLOSED) ws.close(1000, 'analyzer stopping after an error');
  }
}
