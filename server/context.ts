/**
 * ServerContext: what the parts of the server share. Other parts (server/signals, server/auth,
 * server/audit, server/transfer) each export `install(ctx: ServerContext)`, called from app.ts.
 */
import type { EventEmitter } from 'node:events';
import type { Express } from 'express';
import type { RouteTable } from './api/route-table.ts';
import type { Auth } from './auth/types.ts';
import type { AuditTrail } from './audit/types.ts';
import type { ServerConfig } from './config.ts';
import type { Metrics } from './metrics.ts';
import type { Storage } from './storage/storage.ts';
import type { IngestPipeline } from './ingest/pipeline.ts';
import type { LiveHub } from './live/live-hub.ts';
import type { Logger } from './logger.ts';

/**
 * Events on `ctx.events` (emitted after the commit that stored them):
 * - 'outbox'  (rows: OutboxRow[])                        new outbox rows
 * - 'result'  ({ unit, batch, result: MonitorResult })
 * - 'alarm'   ({ alarm: Alarm, previousState })
 * - 'endpoint'({ unit, batch, from, to, endpoint, t, seq })
 * - 'batch'   ({ event: 'started' | 'ended', batch: BatchSummary-like row })
 */
export interface ServerContext {
  config: ServerConfig;
  /** The storage: every part reads and writes through its interface (server/storage/storage.ts). */
  storage: Storage;
  app: Express;
  /** Express router mounted at /api. */
  api: import('express').Router;
  /**
   * The REST route table, mounted on `api` after every part is installed: parts add their routes
   * here (or `include` a table they mount themselves) so each is validated and in /api/openapi.json.
   */
  routes: RouteTable;
  live: LiveHub;
  ingest: IngestPipeline;
  metrics: Metrics;
  log: Logger;
  events: EventEmitter;
  /** The hash-chained audit trail (server/audit); always there. */
  audit: AuditTrail;
  /** Access control (server/auth); always there: every /api route, /live and /ingest goes through it. */
  auth: Auth;
  /** Called on shutdown, last registered first. */
  onClose(fn: () => void | Promise<void>): void;
  /** Clock (ms epoch); tests may replace it. */
  now(): number;
  /** Set by the demo (scripts/demo.ts): its units are simulated and replayed faster than real time. */
  simulation?: import('../core/api/rest.ts').SimulationInfo | null;
}
