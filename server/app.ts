/**
 * Builds and starts a Tideline server: storage, ingest pipeline, live hub, REST API, metrics,
 * the dashboard, access control and the audit trail, and the parts that install themselves through
 * ServerContext.
 */
import { createHash, timingSafeEqual } from 'node:crypto';
import { EventEmitter } from 'node:events';
import { existsSync, readFileSync } from 'node:fs';
import type { IncomingMessage, Server } from 'node:http';
import type { Duplex } from 'node:stream';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import express from 'express';
import { WebSocketServer } from 'ws';
import { MAX_MESSAGE_BYTES } from '../core/protocol/ingest-messages.ts';
import { LIVE_PATH } from '../core/api/live.ts';
import { install as installAuth } from './auth/index.ts';
import { applyIdleLimit, serverOptions } from './http-limits.ts';
import { createSecurity } from './auth/security-setup.ts';
import { createWebServer, schemes } from './auth/tls.ts';
import type { Role } from './auth/types.ts';
import type { ServerConfig } from './config.ts';
import type { ServerContext } from './context.ts';
import { IngestConnection } from './ingest/ingest-socket.ts';
import { IngestPipeline } from './ingest/pipeline.ts';
import { LiveHub } from './live/live-hub.ts';
import { createLogger, type Logger } from './logger.ts';
import { createMetrics } from './metrics.ts';
import { SqliteStorage } from './storage/sqlite-storage.ts';
import { StartupError } from './startup-error.ts';
import { HttpProblem, problemHandler } from './api/problem.ts';
import { RouteTable } from './api/route-table.ts';
import { addPlantRoutes, remoteAddresses } from './api/routes-plant.ts';
import { addBatchRoutes } from './api/routes-batches.ts';
import { addLabRoutes } from './api/routes-lab.ts';
import { addModelRoutes } from './api/routes-models.ts';
import { addViewRoutes } from './api/routes-views.ts';

const here = dirname(fileURLToPath(import.meta.url));
const VERSION: string = JSON.parse(readFileSync(join(here, '..', 'package.json'), 'utf8')).version;

export interface TidelineServer {
  ctx: ServerContext;
  http: Server;
  port: number;
  /** http://host:port */
  url: string;
  routes: RouteTable;
  close(): Promise<void>;
}

export interface StartOptions {
  /** SQLite file; default <dataDir>/tideline.db. */
  dbFile?: string;
  /** Replace the clock (tests). */
  now?: () => number;
  /** Replace the logger (tests that read what the server says). */
  log?: Logger;
}

export async function startServer(config: ServerConfig, opts: StartOptions = {}): Promise<TidelineServer> {
  const log = opts.log ?? createLogger(config.logLevel);
  const now = opts.now ?? Date.now;
  const app = express();
  app.disable('x-powered-by');
  // https (and wss) when tls.cert/tls.key are configured (docs/security.md); made first, so that a
  // certificate that cannot be used stops the start before the database is opened
  const http = createWebServer(app, config.tls, serverOptions(config.http));
  applyIdleLimit(http, config.http);
  const storage = new SqliteStorage({ file: opts.dbFile ?? join(config.dataDir, 'tideline.db'), synchronous: config.synchronous, checkpointInWorker: config.walCheckpoint === 'worker' });
  const metrics = createMetrics();
  const events = new EventEmitter();
  events.setMaxListeners(100);
  const api = express.Router();
  const closers: (() => void | Promise<void>)[] = [];
  const pipeline = new IngestPipeline(storage, config, events, metrics, log, now);
  const live = new LiveHub(pipeline, storage, config, metrics, log, events);
  // Every /api route is in this table (or in a table included in it): validated by its zod
  // schemas, guarded by its role, listed in /api/openapi.json. Parts add theirs when installed.
  const routes = new RouteTable();
  // Access control and the audit trail are part of every server: no route, socket or action runs without them.
  const { audit, auth } = createSecurity(storage, config, now);
  const ctx: ServerContext = {
    config, storage, app, api, routes, live, ingest: pipeline, metrics, log, events, audit, auth,
    onClose: (fn) => closers.push(fn),
    now,
  };

  for (const u of config.units) {
    if (!(await storage.getUnit(u.id))) await storage.createUnit({ id: u.id, name: u.name ?? u.id, kind: u.kind, description: '', createdAt: now() });
  }
  // alarm actions the server takes itself (suppression by state) go to the audit trail, from the
  // first commit on (recovery at start included); the pipeline records them after its commit and
  // does not wait, so a failure is logged here
  pipeline.audit = { record: (e) => void audit.record(e).catch((err: Error) => log.error(`audit record ${e.action} ${e.object} failed`, err)) };
  await pipeline.start();

  installAuth(ctx);
  // A broken audit trail does not stop monitoring (the plant needs it), but it is said at every
  // start, naming the database and the first broken record.
  const verified = await audit.verify();
  if (!verified.ok) {
    log.error(
      `the audit trail in ${opts.dbFile ?? join(config.dataDir, 'tideline.db')} is BROKEN at record ${verified.brokenSeq}: ${verified.problem}. ` +
        'The server starts, and new records are chained on; report this under your quality system and compare with a kept anchor (npm run tideline -- audit verify --anchor SEQ:HASH).',
    );
  }
  for (const part of ['signals', 'transfer', 'model-life']) {
    const file = join(here, part, 'index.ts');
    if (!existsSync(file)) continue;
    const mod = (await import(`./${part}/index.ts`)) as { install?: (c: ServerContext) => void | Promise<void> };
    if (typeof mod.install === 'function') await mod.install(ctx);
  }

  const startedAt = now();
  addPlantRoutes(routes, ctx, startedAt, VERSION);
  addBatchRoutes(routes, ctx);
  addLabRoutes(routes, ctx);
  addModelRoutes(routes, ctx);
  addViewRoutes(routes, ctx);
  routes.add({
    method: 'get', path: '/openapi.json', summary: 'This OpenAPI 3.1 document: every /api route with its schemas and least role', role: 'public',
    response: 'application/json',
    handler: async () => routes.openapi({ version: VERSION }),
  });
  // JSON bodies up to 1 MB, read after the role check; a route may bring its own parser
  // (POST /api/import: larger file imports). /api/auth/* has its own 16 KiB parser.
  routes.mount(api, (role: Role) => auth.requireRole(role), { bodyParser: express.json({ limit: '1mb' }) });
  api.use((req, _res, next) => next(new HttpProblem(404, 'Not found', `no API route ${req.method} ${req.baseUrl}${req.path}; see /api/openapi.json`, 'not-found')));
  api.use(problemHandler(log));
  app.use('/api', api);

  // /metrics as the metrics.access setting says: off (404), token (Bearer, compared in constant
  // time) or open. Metrics name units, batches' counts and error codes: not for everyone by default.
  const metricsToken = config.metrics.token === null ? null : createHash('sha256').update(config.metrics.token).digest();
  app.get('/metrics', async (req, res) => {
    if (config.metrics.access === 'off') {
      res.status(404).type('text/plain').send('metrics are off (setting metrics.access: off | token | open)\n');
      return;
    }
    if (config.metrics.access === 'token') {
      // the scheme name is case-insensitive (RFC 9110 §11.1)
      const m = /^Bearer +(\S+) *$/i.exec(req.get('authorization') ?? '');
      const given = m ? createHash('sha256').update(m[1]!).digest() : null;
      if (!given || !metricsToken || !timingSafeEqual(given, metricsToken)) {
        res.status(401).set('WWW-Authenticate', 'Bearer realm="tideline-metrics"').type('text/plain').send('metrics need Authorization: Bearer <metrics.token>\n');
        return;
      }
    }
    res.type(metrics.registry.contentType).send(await metrics.registry.metrics());
  });
  app.get('/healthz', (_req, res) => void res.json({ ok: true }));
  if (config.webDir) {
    const webDir = resolve(config.webDir);
    if (existsSync(join(webDir, 'index.html'))) {
      app.use(express.static(webDir, { index: 'index.html' }));
      app.get(/^\/(?!api\/|metrics$|ingest$|live$).*/, (_req, res) => res.sendFile(join(webDir, 'index.html')));
    } else {
      app.get('/', (_req, res) => {
        res.type('text/plain').send(`Tideline server ${VERSION}. The dashboard is not built (looked in ${webDir}): npm run tideline -- serve builds it when Vite is installed (npm install); or run npm run build:web.`);
      });
    }
  }
  app.use(problemHandler(log));

  // ws closes beyond its maxPayload with 1009 and no word; the connection refuses a message above
  // MAX_MESSAGE_BYTES itself first, with a too-large error frame (ws's limit is the hard cap on memory).
  const ingestWss = new WebSocketServer({ noServer: true, maxPayload: 2 * MAX_MESSAGE_BYTES, perMessageDeflate: false });
  const liveWss = new WebSocketServer({ noServer: true, maxPayload: 64 * 1024, perMessageDeflate: false });
  const conns = new Set<IngestConnection>();
  /** The token each ingest connection authenticated with: re-checked at a revocation and every heartbeat, so a revoked token ends its open connections. */
  const tokens = new Map<IngestConnection, string>();
  const recheckTokens = async (only?: string) => {
    for (const [c, token] of [...tokens]) {
      if (only !== undefined && c.analyzer !== only) continue;
      const analyzer = await auth.verifyAnalyzerToken(token);
      if (analyzer !== c.analyzer) {
        tokens.delete(c);
        c.revoked();
      }
    }
  };
  // A revocation through the server (REST) closes the analyzer's connections before it is answered;
  // one written by another process (the CLI beside a running server) is found at the next heartbeat.
  auth.onAnalyzerTokenRevoked((analyzer) => recheckTokens(analyzer));

  const refuse = (socket: Duplex, status: number, text: string, message: string) => {
    socket.write(`HTTP/1.1 ${status} ${text}\r\nContent-Type: text/plain\r\nConnection: close\r\nContent-Length: ${Buffer.byteLength(message)}\r\n\r\n${message}`);
    socket.destroy();
  };

  http.on('upgrade', (req: IncomingMessage, socket: Duplex, head: Buffer) => {
    socket.on('error', () => undefined);
    const path = (req.url ?? '/').split('?')[0];
    if (path === '/ingest') {
      const header = req.headers.authorization ?? '';
      const m = /^Bearer\s+(\S+)$/i.exec(header);
      if (!m) return refuse(socket, 401, 'Unauthorized', 'send the analyzer token as Authorization: Bearer <token>');
      const token = m[1]!;
      void (async () => {
        const analyzer = await auth.verifyAnalyzerToken(token);
        if (!analyzer) return refuse(socket, 401, 'Unauthorized', 'unknown or revoked analyzer token');
        ingestWss.handleUpgrade(req, socket, head, (ws) => {
          const addr = `${req.socket.remoteAddress ?? '?'}:${req.socket.remotePort ?? '?'}`;
          remoteAddresses.set(analyzer, addr);
          metrics.ingestConnections.inc();
          const c = new IngestConnection(ws, analyzer, addr, pipeline, config, metrics, log);
          conns.add(c);
          tokens.set(c, token);
          ws.on('close', () => {
            conns.delete(c);
            tokens.delete(c);
          });
        });
      })().catch((e) => {
        log.error('ingest upgrade failed', e);
        refuse(socket, 500, 'Internal Server Error', 'internal error');
      });
      return;
    }
    if (path === LIVE_PATH) {
      // A browser sends the page's Origin with every WebSocket; a page of another site must not ride
      // on the session cookie (cross-site WebSocket hijacking). A client without Origin is no browser.
      const origin = req.headers.origin;
      if (origin !== undefined && !sameOrigin(origin, req.headers.host)) {
        return refuse(socket, 403, 'Forbidden', `Origin ${origin.slice(0, 100)} is not this server (${req.headers.host ?? '?'}); /live accepts only pages served by Tideline itself`);
      }
      void (async () => {
        if (!(await auth.userFromRequest(req))) return refuse(socket, 401, 'Unauthorized', 'log in first (POST /api/auth/login)');
        liveWss.handleUpgrade(req, socket, head, (ws) => {
          live.attach(ws);
          void auth.closeWhenSessionEnds(req, ws).catch((e) => log.error('watching a /live session failed', e));
        });
      })().catch((e) => {
        log.error('live upgrade failed', e);
        refuse(socket, 500, 'Internal Server Error', 'internal error');
      });
      return;
    }
    refuse(socket, 404, 'Not Found', `no WebSocket endpoint at ${path}; use /ingest or ${LIVE_PATH}`);
  });

  const heartbeat = setInterval(() => {
    for (const c of conns) c.heartbeat();
    void recheckTokens().catch((e) => log.error('re-checking analyzer tokens failed', e));
  }, config.ingest.heartbeatMs);
  heartbeat.unref();

  let closing: Promise<void> | null = null;
  const close = () =>
    (closing ??= (async () => {
      clearInterval(heartbeat);
      for (const c of conns) c.close(1001, 'server shutting down');
      live.close();
      for (const ws of ingestWss.clients) ws.terminate();
      for (const ws of liveWss.clients) ws.terminate();
      await new Promise<void>((r) => {
        http.close(() => r());
        http.closeAllConnections();
      });
      await pipeline.stop();
      for (const fn of closers.reverse()) await fn();
      await storage.close();
    })());

  try {
    await new Promise<void>((res, rej) => {
      http.once('error', rej);
      http.listen(config.port, config.host, () => {
        http.off('error', rej);
        res();
      });
    });
  } catch (e) {
    await close().catch(() => undefined);
    const code = (e as { code?: string }).code;
    if (code === 'EADDRINUSE') throw new StartupError(`port ${config.port} on ${config.host} is already in use (setting port; 0 picks a free port)`);
    if (code === 'EACCES') throw new StartupError(`port ${config.port} on ${config.host} may not be opened by this user (setting port: use one above 1023, or a proxy)`);
    if (code === 'EADDRNOTAVAIL') throw new StartupError(`address ${config.host} is not an address of this machine (setting host)`);
    throw e;
  }
  const addr = http.address();
  const port = typeof addr === 'object' && addr ? addr.port : config.port;
  const host = config.host.includes(':') ? `[${config.host}]` : config.host;
  log.info(`Tideline ${VERSION} listening on ${schemes(config.tls).http}://${host}:${port} (data: ${opts.dbFile ?? join(config.dataDir, 'tideline.db')})`);

  return { ctx, http, port, url: `${schemes(config.tls).http}://${host}:${port}`, routes, close };
}

/** The Origin header names the host (and port) the request was sent to. */
function sameOrigin(origin: string, host: string | undefined): boolean {
  if (!host) return false;
  try {
    return new URL(origin).host.toLowerCase() === host.toLowerCase();
  } catch {
    return false;
  }
}
