/** Test helpers: a server on a free loopback port with a temp data folder, and a raw analyzer peer. */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import WebSocket from 'ws';
import { loadConfig, type ServerConfigInput } from '../../server/config.ts';
import { startServer, type TidelineServer } from '../../server/app.ts';
import { createAnalyzerToken } from '../../server/ingest/analyzer-tokens.ts';
import { encodeSpectrumFrame } from '../../core/protocol/binary-frame.ts';

export interface TestServer {
  server: TidelineServer;
  dir: string;
  token: string;
  wsUrl: string;
  stop(): Promise<void>;
}

export async function startTestServer(overrides: ServerConfigInput = {}, opts: { dir?: string; units?: string[]; analyzer?: string } = {}): Promise<TestServer> {
  const dir = opts.dir ?? mkdtempSync(join(tmpdir(), 'tideline-test-'));
  const config = loadConfig({
    overrides: {
      host: '127.0.0.1', port: 0, dataDir: dir, webDir: null, logLevel: 'error',
      units: (opts.units ?? ['dryer-1']).map((id) => ({ id, kind: 'dryer' as const })),
      auth: { scryptLog2N: 10 },
      ...overrides,
    },
  });
  const server = await startServer(config);
  const token = await createAnalyzerToken(server.ctx.storage, opts.analyzer ?? 'nir-1', Date.now());
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
