/**
 * `npm start`: the whole of Tideline on one machine, with invented demo data.
 *
 * 1. Starts the server (port from config/env/flags, default 8470, or a free port if that is taken;
 *    SQLite in ./data).
 * 2. On first start: simulates reference batches for a fluid-bed dryer and a batch reactor and
 *    builds each unit's first model the way a site would: the batches are streamed into the server
 *    over the public ingest protocol, lab results for a few spectra per batch (LOD moisture for the
 *    dryer, HPLC conversion for the reactor; simulators/lab-samples.ts) are attached through the
 *    lab-values REST API, and the model is built by the same service the build route uses, from
 *    those lab values — not from the simulator's truth on every spectrum. It is approved (marked as
 *    a demo approval, not a validated model) and deployed.
 * 3. Streams accelerated dryer and reactor batches from simulated analyzers, now and then a faulty
 *    one, until Ctrl-C; serves the dashboard and prints its URL and the demo login.
 *
 * Flags: --speed N (×N real time for the dryer, ×4N for the reactor; default 60), --history-days N
 * (how far back the simulated process clock starts, default 7 for the dryer, ×4 for the reactor),
 * --seed N, and every server configuration flag (see docs/configuration.md).
 *
 * Time in the demo (docs/dashboard.md, "Time"): each simulated analyzer stamps its spectra with a
 * process clock that starts --history-days before now and runs ×speed, so batches replay quickly
 * and are dated in the past; a spectrum is never sent before the wall clock reaches its time stamp,
 * so when the process clock catches up with the present (after history / speed of wall time) the
 * demo goes on in real time and no time is ever dated in the future. The server's /api/info and
 * every report mark the data as simulated with the speed-up.
 *
 * Tideline advises; the site's validated control strategy, interlocks and procedures decide what a
 * signal may do. The demo models are approved automatically and are not validated.
 */
import { randomUUID } from 'node:crypto';
import { ConfigError, loadConfig, type ServerConfig } from '../server/config.ts';
import { startServer, type TidelineServer } from '../server/app.ts';
import { ensureDemoAdministrator } from '../server/auth/index.ts';
import { buildFromStored } from '../server/models/model-service.ts';
import { parseMonitoringModel } from '../core/model/monitoring-model.ts';
import { earlyBatchesText } from '../core/model/endpoint-check.ts';
import { recordAudit } from '../server/api/audit-helper.ts';
import { simulateBatch, simulateReferenceSet, FAULT_INFO, FAULT_TYPES, type FaultSpec, type SimulatedBatch } from '../simulators/batch.ts';
import { drawLabSamples, LAB_METHODS } from '../simulators/lab-samples.ts';
import { deriveSeed, Rng } from '../simulators/prng.ts';
import { AnalyzerClient } from '../simulators/stream-client.ts';
import { defaultSettings } from './evaluate.ts';

type Kind = 'dryer' | 'reactor';
interface Line {
  kind: Kind;
  unit: string;
  unitName: string;
  analyzer: string;
  product: string;
  refSeed: number;
  refCount: number;
  speedFactor: number;
}

const LINES: Line[] = [
  { kind: 'dryer', unit: 'dryer-1', unitName: 'Fluid-bed dryer 1', analyzer: 'nir-dryer-1', product: 'granule A', refSeed: 4201, refCount: 30, speedFactor: 1 },
  { kind: 'reactor', unit: 'reactor-1', unitName: 'Batch reactor 1', analyzer: 'nir-reactor-1', product: 'amide C', refSeed: 4301, refCount: 30, speedFactor: 4 },
];

function parseArgs(argv: string[]): { speed: number; seed: number; historyDays: number; flags: Record<string, string> } {
  const flags: Record<string, string> = {};
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i]!;
    if (!a.startsWith('--')) throw new ConfigError(`unexpected argument "${a}"`);
    const eq = a.indexOf('=');
    const key = eq > 0 ? a.slice(2, eq) : a.slice(2);
    const val = eq > 0 ? a.slice(eq + 1) : argv[++i];
    if (val === undefined) throw new ConfigError(`flag --${key} needs a value`);
    flags[key.replace(/-([a-z])/g, (_, c: string) => c.toUpperCase())] = val;
  }
  const speed = Number(flags.speed ?? 60);
  const seed = Number(flags.seed ?? Date.now() % 100000);
  const historyDays = Number(flags['history-days'] ?? 7);
  delete flags.speed;
  delete flags.seed;
  delete flags['history-days'];
  if (!(historyDays >= 0 && historyDays <= 365)) throw new ConfigError(`--history-days must be a number in [0, 365], got "${historyDays}"`);
  if (!(speed > 0 && speed <= 10000)) throw new ConfigError(`--speed must be a number in (0, 10000], got "${speed}"`);
  if (!Number.isInteger(seed) || seed < 0) throw new ConfigError(`--seed must be a non-negative integer`);
  return { speed, seed, historyDays, flags };
}

async function start(config: ServerConfig): Promise<TidelineServer> {
  try {
    return await startServer(config);
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code === 'EADDRINUSE' && config.port !== 0) {
      console.log(`  port ${config.port} is taken; using a free port instead`);
      return startServer({ ...config, port: 0 });
    }
    throw e;
  }
}

/** A session on the demo's own REST API (cookie and CSRF token, docs/security.md). */
class DemoSession {
  private cookie = '';
  private csrf = '';
  constructor(private readonly base: string) {}
  async login(name: string, password: string): Promise<void> {
    const r = await fetch(`${this.base}/api/auth/login`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ name, password }) });
    if (!r.ok) throw new Error(`demo: login as ${name} failed (HTTP ${r.status}): ${await r.text()}`);
    this.csrf = ((await r.json()) as { csrfToken: string }).csrfToken;
    this.cookie = r.headers.getSetCookie().map((c) => c.split(';')[0]!).join('; ');
  }
  async post(path: string, body: unknown): Promise<{ status: number; text: string }> {
    const r = await fetch(`${this.base}${path}`, { method: 'POST', headers: { cookie: this.cookie, 'x-csrf-token': this.csrf, 'content-type': 'application/json' }, body: JSON.stringify(body) });
    return { status: r.status, text: await r.text() };
  }
}

/**
 * Attach the lab results of each reference batch through POST /api/batches/:batch/lab-values, as a
 * lab would enter them after the batch. A result already there (a restart during the first start)
 * is kept: lab values are never overwritten.
 */
async function attachLabValues(api: DemoSession, line: Line, refs: SimulatedBatch[]): Promise<number> {
  const m = LAB_METHODS[line.kind];
  let n = 0;
  for (const b of refs) {
    for (const l of drawLabSamples(b, new Rng(deriveSeed(line.refSeed, `lab:${b.id}`)))) {
      const r = await api.post(`/api/batches/${encodeURIComponent(b.id)}/lab-values`, { property: m.property, value: l.value, unit: m.unit, sampleT: l.sampleT, method: m.method });
      if (r.status === 409) continue;
      if (r.status !== 201 && r.status !== 200) throw new Error(`demo: lab value for ${b.id} refused (HTTP ${r.status}): ${r.text}`);
      n++;
    }
  }
  return n;
}

async function setUpLine(s: TidelineServer, line: Line, url: string, api: DemoSession, log: (l: string) => void, processClockStart: number): Promise<AnalyzerClient> {
  const ctx = s.ctx;
  if (!ctx.ingest.units.has(line.unit)) {
    const row = { id: line.unit, name: line.unitName, kind: line.kind, description: `demo ${line.kind} (simulated)`, createdAt: ctx.now() };
    await ctx.storage.createUnit(row);
    ctx.ingest.addUnit(row);
  }
  if (!(await ctx.storage.getAnalyzer(line.analyzer))) await ctx.storage.createAnalyzer({ id: line.analyzer, name: `${line.kind} NIR probe`, createdAt: ctx.now() });
  const { token } = await ctx.auth!.createAnalyzerToken(line.analyzer, `demo ${new Date().toISOString()}`, 'demo');
  const refs = simulateReferenceSet(line.kind, line.refCount, line.refSeed, { unit: line.unit, product: line.product });
  const client = new AnalyzerClient({ url, token, analyzer: line.analyzer, axis: refs[0]!.axis, instrument: `simulated ${line.kind} NIR analyzer (demo)`, processClockStart, log: (l) => log(`  ${line.analyzer}: ${l}`) });
  await client.start();
  if (!ctx.ingest.deploymentRef(line.unit)) {
    log(`  first start: streaming ${refs.length} simulated reference batches for ${line.unit} …`);
    const known = new Set(await ctx.storage.batchIds());
    for (const b of refs) if (!known.has(b.id)) await client.sendBatch(b, { speed: 0, unit: line.unit, timestamps: 'original' });
    const m = LAB_METHODS[line.kind];
    const n = await attachLabValues(api, line, refs);
    log(`  attached ${n} ${m.method} ${m.property} results (a few per batch) through the lab-values API`);
    log(`  building the ${line.kind} monitoring model from ${refs.length} reference batches and their lab values …`);
    // The service the build route (POST /api/models/build) uses: a worker thread, so the dashboard,
    // ingest and signals stay responsive while the model is computed; the reference batches and their
    // lab values are read from the record. The settings are the evaluation's (scripts/evaluate.ts).
    const { name: _n, product: _p, author: _a, createdAt: _c, ...settings } = defaultSettings(line.kind);
    const row = await buildFromStored(ctx, { name: `${line.kind}-${line.product.replace(/\s+/g, '-')}`, product: line.product, referenceBatches: refs.map((b) => b.id), settings: settings as Record<string, unknown> }, 'demo-setup');
    await recordAudit(ctx, { user: 'demo-setup', action: 'model.build', object: `model:${row.name}@${row.version}`, after: { id: row.id, sha256: row.sha256, referenceBatches: row.referenceBatches } });
    const reason = 'demo: approved automatically at first start; NOT a validated model';
    // The leave-one-batch-out endpoint check: where the rule fires early on a reference batch the
    // API refuses approval without a signed override; the demo records that it overrides it.
    const check = parseMonitoringModel(row.body).meta.endpointCheck;
    const early = check && check.early > 0 ? earlyBatchesText(check) : null;
    const override = early ? `demo: ${early}; approved anyway for the demonstration only` : undefined;
    if (early) log(`  endpoint check: ${early} (demo override recorded)`);
    await ctx.storage.approveModelVersion(row.id, 'demo-setup', ctx.now(), reason);
    await recordAudit(ctx, { user: 'demo-setup', action: 'model.approve', object: `model:${row.name}@${row.version}`, after: { id: row.id, sha256: row.sha256, ...(override ? { override } : {}) }, reason });
    await ctx.storage.deploy({ id: randomUUID(), unit: line.unit, modelVersion: row.id, deployedAt: ctx.now(), deployedBy: 'demo-setup', reason: 'demo', endedAt: null });
    await recordAudit(ctx, { user: 'demo-setup', action: 'model.deploy', object: `unit:${line.unit}`, after: { versionId: row.id }, reason: 'demo' });
    await ctx.ingest.refreshDeployment(line.unit);
    log(`  ${row.name} v${row.version} (${row.components} PCs, sha256 ${row.sha256.slice(0, 12)}…) deployed to ${line.unit}`);
  }
  return client;
}

/** Every 4th batch carries a fault that fits the process. */
function nextBatch(line: Line, seed: number, k: number, processT: number): SimulatedBatch {
  // the id carries the batch's own (process) start time, as a site's batch ids carry their date
  const stamp = new Date(processT).toISOString().slice(0, 16).replace(/[-:T]/g, '');
  let faults: FaultSpec[] | undefined;
  if (k % 4 === 3) {
    const fitting = FAULT_TYPES.filter((f) => FAULT_INFO[f].kinds.includes(line.kind) && f !== 'dropout');
    const type = fitting[(seed + k) % fitting.length]!;
    // Over-wet granules are charged wet: that fault starts with the batch (simulators/faults.ts).
    faults = [{ type, onsetS: type === 'over-wet' ? 0 : line.kind === 'dryer' ? 900 : 2400 }];
  }
  return simulateBatch(line.kind, { seed: seed * 100 + k, id: `${line.unit}-${stamp}-${String(k).padStart(3, '0')}`, unit: line.unit, product: line.product, faults });
}

let stopping = false;

const HELP = `npm start [-- options]   Tideline demo: server, simulated dryer and reactor, dashboard

Invented data from simulated analyzers. Models are approved automatically as a demo and are not
validated. Tideline advises; the site's validated control strategy, interlocks and procedures decide.

Options:
  --speed N          replay speed: dryer ×N, reactor ×4N real time (default 60; at most 10000)
  --history-days N   the simulated process clocks start N days (dryer) and 4N days (reactor) before
                     now and replay at that speed until they reach the present, then run in real
                     time; nothing is dated in the future (default 7; 0 starts at now)
  --seed N           seed of the simulated batches (default: from the clock)
  --help             this text
  and every server option (--port, --host, --data-dir, --web-dir, …; docs/configuration.md)

Time: process times (spectra, batch start and end, alarms) are the simulated analyzers' clocks in
UTC; acknowledgements, signatures and reports carry the real time (docs/dashboard.md, "Time").`;

async function main() {
  if (process.argv.slice(2).some((a) => a === '--help' || a === '-h')) {
    console.log(HELP);
    return;
  }
  const { speed, seed, historyDays, flags } = parseArgs(process.argv.slice(2));
  const config = loadConfig({ env: process.env, flags });
  console.log('Tideline demo — invented data from simulated analyzers.');
  console.log("Tideline advises; the site's validated control strategy, interlocks and procedures decide what a signal may do.\n");
  const s = await start(config);
  const wsUrl = s.url.replace(/^http/, 'ws') + '/ingest';
  const log = (l: string) => console.log(l);
  const clients: AnalyzerClient[] = [];
  const loops: Promise<void>[] = [];
  const stop = async () => {
    if (stopping) return;
    stopping = true;
    console.log('\nstopping …');
    for (const c of clients) await c.close().catch(() => undefined);
    await Promise.allSettled(loops);
    await s.close();
    console.log('stopped.');
    process.exit(0);
  };
  process.on('unhandledRejection', (e) => console.error('demo: unhandled rejection:', e));
  process.once('SIGINT', () => void stop());
  process.once('SIGTERM', () => void stop());

  const startedAt = Date.now();
  s.ctx.simulation = {
    units: LINES.map((l) => ({ unit: l.unit, speedUp: speed * l.speedFactor })),
    note: `Demo data from simulated analyzers, replayed faster than real time (dryer ×${speed}, reactor ×${speed * 4}). Each analyzer's process clock started ${historyDays * 1} day(s) (dryer) and ${historyDays * 4} day(s) (reactor) before the demo started, so batches are dated in the past; once a clock reaches the present the demo runs in real time. Times shown are the simulated process times in UTC; alarm acknowledgements, signatures and reports carry the real time.`,
  };
  const admin = await ensureDemoAdministrator(s.ctx);
  const api = new DemoSession(s.url);
  await api.login(admin.name, admin.password);
  for (const line of LINES) clients.push(await setUpLine(s, line, wsUrl, api, log, startedAt - historyDays * line.speedFactor * 86_400_000));
  console.log(admin.notice);
  console.log(`  Dashboard:  ${s.url}/`);
  console.log(`  REST API:   ${s.url}/api/openapi.json    Metrics: ${config.metrics.access === 'off' ? 'off (--metrics.access open|token)' : `${s.url}/metrics`}`);
  console.log(`  Streaming:  dryer ×${speed}, reactor ×${speed * 4} (every 4th batch has a fault). Ctrl-C stops.`);
  console.log(`  Time:       simulated process clocks start ${historyDays} d (dryer) and ${historyDays * 4} d (reactor) ago and replay at that speed until they reach now, then run in real time; nothing is dated in the future.\n`);

  LINES.forEach((line, i) => {
    const client = clients[i]!;
    loops.push(
      (async () => {
        for (let k = 0; !stopping; k++) {
          const b = nextBatch(line, seed + i, k, client.nextProcessTime());
          const fault = b.truth.faults.map((f) => f.type).join(', ');
          log(`  ${line.unit}: batch ${b.id} (${b.spectra.length} spectra${fault ? `, fault: ${fault}` : ''})`);
          try {
            await client.sendBatch(b, { speed: speed * line.speedFactor, unit: line.unit, notAheadOfWallClock: true });
          } catch (e) {
            if (stopping) return;
            log(`  ${line.unit}: streaming stopped: ${(e as Error).message}`);
            return;
          }
          await new Promise((r) => setTimeout(r, 3000));
        }
      })(),
    );
  });
}

main().catch((e) => {
  if (stopping) return;
  console.error(e instanceof ConfigError ? `demo: ${e.message}` : e);
  process.exit(1);
});
