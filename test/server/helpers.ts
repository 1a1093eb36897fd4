/** Test helpers: a server on a free loopback port with a temp data folder, and a raw analyzer peer. */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import WebSocket from 'ws';
import { loadConfig, type ServerConfigInput } from '../../server/config.ts';
import { startServer, type TidelineServer } from '../../server/app.ts';
import { AnalyzerTokenStore } from '../../server/auth/analyzer-tokens.ts';
import { encodeSpectrumFrame } from '../../core/protocol/binary-frame.ts';
import type { Logger } from '../../server/logger.ts';
import type Database from 'better-sqlite3';
import { SqliteStorage } from '../../server/storage/sqlite-storage.ts';
import type { Storage } from '../../server/storage/storage.ts';

/** A logger that keeps every line (level and text) for the test to read. */
export function capturingLogger(): Logger & { lines: { level: string; text: string }[] } {
  const lines: { level: string; text: string }[] = [];
  const at = (level: string) => (text: string, extra?: unknown) => {
    lines.push({ level, text: extra === undefined ? text : `${text} ${extra instanceof Error ? extra.message : JSON.stringify(extra)}` });
  };
  return { lines, error: at('error'), warn: at('warn'), info: at('info'), debug: at('debug') };
}

export interface TestServer {
  server: TidelineServer;
  dir: string;
  token: string;
  wsUrl: string;
  stop(): Promise<void>;
}

export async function startTestServer(overrides: ServerConfigInput = {}, opts: { dir?: string; units?: string[]; analyzer?: string; now?: () => number; log?: Logger } = {}): Promise<TestServer> {
  const dir = opts.dir ?? mkdtempSync(join(tmpdir(), 'tideline-test-'));
  const config = loadConfig({
    overrides: {
      host: '127.0.0.1', port: 0, dataDir: dir, webDir: null, logLevel: 'error',
      units: (opts.units ?? ['dryer-1']).map((id) => ({ id, kind: 'dryer' as const })),
      auth: { scryptLog2N: 10 },
      ...overrides,
    },
  });
  const server = await startServer(config, { ...(opts.now ? { now: opts.now } : {}), ...(opts.log ? { log: opts.log } : {}) });
  const token = await analyzerToken(server.ctx.storage, opts.analyzer ?? 'nir-1');
  return {
    server, dir, token, wsUrl: server.url.replace('http', 'ws'),
    stop: async () => {
      await server.close();
      if (!opts.dir) rmSync(dir, { recursive: true, force: true });
    },
  };
}

export type Msg = { type: string; [k: string]: any };

/** A raw analyzer peer that records every server message. */
export class Peer {
  readonly ws: WebSocket;
  readonly messages: Msg[] = [];
  private waiters: { pred: (m: Msg) => boolean; resolve: (m: Msg) => void; reject: (e: Error) => void; timer: NodeJS.Timeout }[] = [];
  closed: { code: number; reason: string } | null = null;
  private closeWaiters: (() => void)[] = [];

  constructor(url: string, token: string | null) {
    this.ws = new WebSocket(url + '/ingest', { headers: token ? { Authorization: `Bearer ${token}` } : {}, perMessageDeflate: false });
    this.ws.on('message', (d: Buffer) => {
      const m = JSON.parse(d.toString()) as Msg;
      this.messages.push(m);
      for (const w of [...this.waiters]) {
        if (w.pred(m)) {
          clearTimeout(w.timer);
          this.waiters.splice(this.waiters.indexOf(w), 1);
          w.resolve(m);
        }
      }
    });
    this.ws.on('close', (code, reason) => {
      this.closed = { code, reason: reason.toString() };
      for (const f of this.closeWaiters) f();
    });
    this.ws.on('error', () => undefined);
  }

  open(): Promise<void> {
    return new Promise((res, rej) => {
      if (this.ws.readyState === WebSocket.OPEN) return res();
      this.ws.once('open', () => res());
      this.ws.once('unexpected-response', (_req, r) => rej(new Error(`upgrade refused: ${r.statusCode}`)));
      this.ws.once('error', rej);
    });
  }

  send(m: unknown) {
    this.ws.send(typeof m === 'string' ? m : JSON.stringify(m));
  }
  sendFrame(seq: number, t: number, values: ArrayLike<number>) {
    this.ws.send(encodeSpectrumFrame(seq, t, values));
  }

  /** Messages before this index were already consumed by a waitFor. */
  private cursor = 0;

  /** Wait for the next message (after the last one a waitFor returned) that matches. */
  waitFor(pred: (m: Msg) => boolean, timeoutMs = 10_000): Promise<Msg> {
    const i = this.messages.findIndex((m, k) => k >= this.cursor && pred(m));
    if (i >= 0) {
      this.cursor = i + 1;
      return Promise.resolve(this.messages[i]!);
    }
    return new Promise((resolve, reject) => {
      const timer = setTimeout(() => reject(new Error(`timed out waiting; got ${JSON.stringify(this.messages.slice(-5))}`)), timeoutMs);
      this.waiters.push({
        pred,
        resolve: (m) => {
          this.cursor = this.messages.indexOf(m) + 1;
          resolve(m);
        },
        reject,
        timer,
      });
    });
  }
  waitAck(seq: number, timeoutMs = 10_000) {
    return this.waitFor((m) => m.type === 'ack' && m.seq >= seq, timeoutMs);
  }
  waitError(code: string, timeoutMs = 10_000) {
    return this.waitFor((m) => m.type === 'error' && m.code === code, timeoutMs);
  }
  waitClose(timeoutMs = 10_000): Promise<{ code: number; reason: string }> {
    if (this.closed) return Promise.resolve(this.closed);
    return new Promise((res, rej) => {
      const t = setTimeout(() => rej(new Error('timed out waiting for close')), timeoutMs);
      this.closeWaiters.push(() => {
        clearTimeout(t);
        res(this.closed!);
      });
    });
  }
  async hello(analyzer: string, boot: number, axis: number[]): Promise<Msg> {
    this.send({ type: 'hello', protocol: 1, analyzer, boot, axis });
    return this.waitFor((m) => m.type === 'welcome' || m.type === 'error');
  }
  close() {
    this.ws.close();
  }
}

export function axis(n: number, from = 1100, step = 2): number[] {
  return Array.from({ length: n }, (_, i) => from + i * step);
}

export function spectrum(n: number, k: number): number[] {
  return Array.from({ length: n }, (_, i) => 0.5 + 0.1 * Math.sin(i / 7 + k / 10));
}

export interface Session {
  cookie: string;
  csrf: string;
  get(path: string): Promise<{ status: number; body: any; type: string }>;
  post(path: string, body: unknown): Promise<{ status: number; body: any; type: string }>;
}

/** Create a user with the role and log in; returns a small fetch client carrying the session. */
export async function login(ts: TestServer, role: 'viewer' | 'operator' | 'model-owner' | 'administrator' = 'administrator', name = `u-${role}`): Promise<Session> {
  const password = 'correct horse battery staple 42';
  const auth = ts.server.ctx.auth!;
  if (!(await (auth as any).users.byName(name))) await (auth as any).createUser({ name, role, password }, 'test');
  const r = await fetch(ts.server.url + '/api/auth/login', { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ name, password }) });
  if (r.status !== 200) throw new Error(`login failed: ${r.status} ${await r.text()}`);
  const cookie = r.headers.getSetCookie().map((c) => c.split(';')[0]).join('; ');
  const csrf = ((await r.json()) as { csrfToken: string }).csrfToken;
  const call = async (method: string, path: string, body?: unknown) => {
    const res = await fetch(ts.server.url + path, {
      method,
      headers: { cookie, 'x-csrf-token': csrf, ...(body === undefined ? {} : { 'content-type': 'application/json' }) },
      body: body === undefined ? undefined : typeof body === 'string' ? body : JSON.stringify(body),
    });
    const type = res.headers.get('content-type') ?? '';
    const text = await res.text();
    return { status: res.status, type, body: type.includes('json') ? JSON.parse(text) : text };
  };
  return { cookie, csrf, get: (p) => call('GET', p), post: (p, b) => call('POST', p, b) };
}

/** A /live browser peer. */
export class LivePeer {
  readonly ws: WebSocket;
  readonly messages: Msg[] = [];
  constructor(url: string, cookie: string) {
    this.ws = new WebSocket(url + '/live', { headers: { cookie }, perMessageDeflate: false });
    this.ws.on('message', (d: Buffer) => this.messages.push(JSON.parse(d.toString())));
    this.ws.on('error', () => undefined);
  }
  open(): Promise<void> {
    return new Promise((res, rej) => {
      this.ws.once('open', () => res());
      this.ws.once('unexpected-response', (_q, r) => rej(new Error(`upgrade refused: ${r.statusCode}`)));
    });
  }
  send(m: unknown) {
    this.ws.send(JSON.stringify(m));
  }
  async until(pred: (m: Msg) => boolean, timeoutMs = 15_000): Promise<Msg> {
    const t0 = Date.now();
    for (;;) {
      const m = this.messages.find(pred);
      if (m) return m;
      if (Date.now() - t0 > timeoutMs) throw new Error(`live: timed out; last: ${JSON.stringify(this.messages.slice(-3)).slice(0, 600)}`);
      await new Promise((r) => setTimeout(r, 10));
    }
  }
}

/**
 * The SQLite connection under a server's storage, for tests that look at the stored rows
 * themselves; refuses any other backend (the server's own code never reaches below the interface).
 */
export function sqliteDb(storage: Storage): Database.Database {
  if (!(storage instanceof SqliteStorage)) throw new Error('these stored rows are read with SQL: the storage is not SQLite');
  return storage.db;
}

/** Issue an analyzer token straight in the storage's one token store (as `tideline analyzer add` does); returns the token. */
export async function analyzerToken(storage: Pick<Storage, 'analyzerTokens'>, analyzer: string): Promise<string> {
  return (await new AnalyzerTokenStore(storage.analyzerTokens, Date.now).create(analyzer, 'test', 'test')).token;
}
