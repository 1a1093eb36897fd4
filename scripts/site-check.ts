/**
 * The site-style check: a site's dryer batches to an endpoint, through the public paths only — the
 * way a new user with their own history would go, with nothing reached through core calls or the
 * server's internals:
 *
 * 1. `npm run sim -- site`'s writer puts a site-style set on disk (simulators/site-set.ts).
 * 2. The command line creates the unit, the analyzer (its token) and a model owner.
 * 3. The server runs as the README says (`tsx server/cli.ts serve`, a temp data folder, port 0).
 * 4. `tideline import --unit … --product … --origin <start from the batch record>` imports each
 *    reference file (lab moisture column and all).
 * 5. REST: sign in, build a model with a property model and an endpoint rule, read the version,
 *    approve it with an electronic signature, deploy it to the unit.
 * 6. /ingest: the test batches are read from their files (start from the batch record) and
 *    streamed with their own times by a client written from docs/protocol.md (DocsIngestClient).
 * 7. REST: endpoint events, results and alarms of every test batch are read back and judged
 *    against the truth files.
 *
 * Used by the end-to-end test (test/e2e/site-endpoint.test.ts, which asserts) and by
 * `npm run evaluate` (which reports the figures as the site_* keys).
 *
 * Tideline advises: the site's validated control strategy, interlocks and procedures decide what an
 * endpoint signal or an alarm may do.
 */
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import WebSocket from 'ws';
import { simulateSiteSet, writeSiteSet, SITE_DEFAULTS, type SiteSet, type SiteSetOptions } from '../simulators/site-set.ts';

const ROOT = join(import.meta.dirname, '..');
const CLI = join(ROOT, 'server', 'cli.ts');

// ---- the command line and the server process ---------------------------------------------------

export interface CliResult {
  status: number;
  stdout: string;
  stderr: string;
}

/** Run `tideline <args>` on a data folder (as `npm run tideline -- …` does), optionally with stdin. */
export function tideline(dataDir: string, args: string[], input?: string): CliResult {
  const r = spawnSync(process.execPath, ['--import', 'tsx', CLI, ...args, '--data-dir', dataDir], { cwd: ROOT, encoding: 'utf8', input, maxBuffer: 64 * 1024 * 1024 });
  if (r.error) throw r.error;
  return { status: r.status ?? -1, stdout: r.stdout, stderr: r.stderr };
}

function mustRun(dataDir: string, args: string[], input?: string): CliResult {
  const r = tideline(dataDir, args, input);
  if (r.status !== 0) throw new Error(`tideline ${args.join(' ')} exited ${r.status}: ${r.stdout}${r.stderr}`);
  return r;
}

export interface ServerProcess {
  url: string;
  child: ChildProcess;
  log: () => string;
  stop(): Promise<void>;
}

/** `tideline serve` on a free loopback port, API only; resolves once it says where it runs. */
export function startServerProcess(dataDir: string): Promise<ServerProcess> {
  const child = spawn(
    process.execPath,
    ['--import', 'tsx', CLI, 'serve', '--port', '0', '--host', '127.0.0.1', '--data-dir', dataDir, '--web-dir', 'none', '--log-level', 'warn', '--synchronous', 'NORMAL'],
    { cwd: ROOT, stdio: ['ignore', 'pipe', 'pipe'] },
  );
  let out = '';
  let err = '';
  child.stdout!.on('data', (d) => (out += d));
  child.stderr!.on('data', (d) => (err += d));
  const stop = () =>
    new Promise<void>((resolve) => {
      if (child.exitCode !== null || child.signalCode !== null) return resolve();
      const timer = setTimeout(() => child.kill('SIGKILL'), 20_000);
      child.once('exit', () => {
        clearTimeout(timer);
        resolve();
      });
      child.kill('SIGTERM');
    });
  return new Promise((resolve, reject) => {
    const timer = setTimeout(() => {
      void stop();
      reject(new Error(`the server did not start within 120 s: ${out} ${err}`));
    }, 120_000);
    const onData = () => {
      const m = /running at (http:\/\/[^\s/]+)/.exec(out);
      if (m) {
        clearTimeout(timer);
        child.stdout!.off('data', onData);
        resolve({ url: m[1]!, child, log: () => out + err, stop });
      }
    };
    child.stdout!.on('data', onData);
    child.once('exit', (code) => {
      clearTimeout(timer);
      reject(new Error(`the server exited with ${code} before it started: ${out} ${err}`));
    });
  });
}

// ---- REST ----------------------------------------------------------------------------------------

export interface Answer<T = any> {
  status: number;
  body: T;
}

/** A REST client with a session: the cookie and the CSRF token (docs/security.md). */
export class Rest {
  private cookie = '';
  private csrf = '';
  constructor(readonly base: string) {}

  async login(name: string, password: string): Promise<void> {
    const r = await fetch(`${this.base}/api/auth/login`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ name, password }) });
    if (r.status !== 200) throw new Error(`login as ${name}: HTTP ${r.status} ${await r.text()}`);
    const body = (await r.json()) as { csrfToken: string };
    this.csrf = body.csrfToken;
    this.cookie = r.headers
      .getSetCookie()
      .map((c) => c.split(';')[0]!)
      .join('; ');
  }

  async get<T = any>(path: string): Promise<Answer<T>> {
    const r = await fetch(`${this.base}${path}`, { headers: { cookie: this.cookie } });
    return { status: r.status, body: (await r.json().catch(() => null)) as T };
  }

  async post<T = any>(path: string, body: unknown): Promise<Answer<T>> {
    const r = await fetch(`${this.base}${path}`, {
      method: 'POST',
      headers: { cookie: this.cookie, 'x-csrf-token': this.csrf, 'content-type': 'application/json' },
      body: JSON.stringify(body),
    });
    return { status: r.status, body: (await r.json().catch(() => null)) as T };
  }

  /** GET that must answer 200. */
  async ok<T = any>(path: string): Promise<T> {
    const a = await this.get<T>(path);
    if (a.status !== 200) throw new Error(`GET ${path}: HTTP ${a.status} ${JSON.stringify(a.body)}`);
    return a.body;
  }
}

// ---- an analyzer client written from docs/protocol.md ---------------------------------------------

/**
 * The site's own streaming code, written from docs/protocol.md alone (no Tideline module): one
 * WebSocket to /ingest with the analyzer's token at the upgrade, `hello` → `welcome`, then the
 * log — `batch-start`, spectra as binary frames laid out as the document's table says, `batch-end`
 * — with seqs counting up from `welcome.resumeAfter + 1`, at most `window` entries unacknowledged.
 * Any `error` frame fails the stream: a site's own clean data must be taken whole.
 */
export class DocsIngestClient {
  private ws: WebSocket | null = null;
  private seq = 0;
  private acked = -1;
  private failure: Error | null = null;
  private wake: (() => void) | null = null;

  constructor(private readonly o: { url: string; token: string; analyzer: string; axis: number[]; window?: number }) {}

  async connect(): Promise<void> {
    const ws = new WebSocket(this.o.url, { headers: { authorization: `Bearer ${this.o.token}` } });
    this.ws = ws;
    const boot = 1_700_000_000_000;
    const welcome = new Promise<number>((resolve, reject) => {
      ws.once('open', () => ws.send(JSON.stringify({ type: 'hello', protocol: 1, analyzer: this.o.analyzer, boot, axis: this.o.axis, instrument: 'site NIR analyzer' })));
      ws.once('unexpected-response', (_req, res) => reject(new Error(`/ingest refused the upgrade: HTTP ${res.statusCode}`)));
      ws.on('error', (e) => {
        this.fail(e);
        reject(e);
      });
      ws.on('close', (code, reason) => this.fail(new Error(`/ingest closed the connection: ${code} ${reason}`)));
      ws.on('message', (data, isBinary) => {
        if (isBinary) return this.fail(new Error('the server sent a binary frame; docs/protocol.md lists none'));
        const m = JSON.parse(String(data)) as { type: string; resumeAfter?: number; seq?: number; code?: string; message?: string };
        if (m.type === 'welcome') resolve(m.resumeAfter!);
        else if (m.type === 'ack') {
          this.acked = Math.max(this.acked, m.seq!);
          this.poke();
        } else if (m.type === 'error') {
          const e = new Error(`/ingest error ${m.code}${m.seq === undefined ? '' : ` at seq ${m.seq}`}: ${m.message}`);
          this.fail(e);
          reject(e);
        }
      });
    });
    this.seq = (await welcome) + 1;
    this.acked = this.seq - 1;
  }

  private fail(e: Error): void {
    this.failure ??= e;
    this.poke();
  }

  private poke(): void {
    const w = this.wake;
    this.wake = null;
    w?.();
  }

  /** Wait until at most `inFlight` entries are unacknowledged. */
  private async drain(inFlight: number): Promise<void> {
    while (this.seq - 1 - this.acked > inFlight) {
      if (this.failure) throw this.failure;
      await new Promise<void>((r) => (this.wake = r));
    }
    if (this.failure) throw this.failure;
  }

  private async send(data: string | Buffer): Promise<void> {
    await this.drain((this.o.window ?? 128) - 1);
    this.ws!.send(data);
    this.seq++;
  }

  /** The binary spectrum frame of docs/protocol.md: a 32-byte little-endian header, then float32 values. */
  static frame(seq: number, t: number, values: ArrayLike<number>): Buffer {
    const buf = Buffer.alloc(32 + 4 * values.length);
    const v = new DataView(buf.buffer, buf.byteOffset, buf.byteLength);
    buf.write('TDL1', 0, 'ascii');
    v.setUint16(4, 1, true);
    v.setUint16(6, 0, true);
    v.setFloat64(8, seq, true);
    v.setFloat64(16, t, true);
    v.setUint32(24, values.length, true);
    v.setUint32(28, 0, true);
    for (let i = 0; i < values.length; i++) v.setFloat32(32 + 4 * i, values[i]!, true);
    return buf;
  }

  /** One batch: start, spectra (t: ms epoch), end; resolves when the server has acknowledged all of it. */
  async sendBatch(b: { unit: string; batch: string; product: string; times: number[]; spectra: ArrayLike<number>[] }): Promise<void> {
    if (!this.ws) throw new Error('connect() first');
    await this.send(JSON.stringify({ type: 'batch-start', seq: this.seq, t: b.times[0], unit: b.unit, batch: b.batch, product: b.product }));
    for (let i = 0; i < b.times.length; i++) await this.send(DocsIngestClient.frame(this.seq, b.times[i]!, b.spectra[i]!));
    await this.send(JSON.stringify({ type: 'batch-end', seq: this.seq, t: b.times[b.times.length - 1], batch: b.batch, reason: 'stopped by the operator' }));
    await this.drain(0);
  }

  close(): Promise<void> {
    const ws = this.ws;
    if (!ws || ws.readyState === WebSocket.CLOSED) return Promise.resolve();
    this.failure ??= new Error('closed');
    return new Promise((r) => {
      ws.once('close', () => r());
      ws.close(1000);
    });
  }
}

/**
 * A site spectra file as the site's streaming code reads it: `batch,time_s,<property>,<nm>…`;
 * the times are the batch start (from the batch record) plus the elapsed seconds.
 */
export function readSiteFile(text: string, startMs: number): { batch: string; axis: number[]; times: number[]; spectra: Float64Array[] } {
  const lines = text.trimEnd().split('\n');
  const head = lines[0]!.split(',');
  if (head[0] !== 'batch' || head[1] !== 'time_s') throw new Error(`not a site spectra file: header starts "${head.slice(0, 3).join(',')}"`);
  const axis = head.slice(3).map(Number);
  const times: number[] = [];
  const spectra: Float64Array[] = [];
  let batch = '';
  for (let k = 1; k < lines.length; k++) {
    const c = lines[k]!.split(',');
    batch = c[0]!;
    times.push(startMs + Math.round(Number(c[1]) * 1000));
    const s = new Float64Array(axis.length);
    for (let j = 0; j < axis.length; j++) s[j] = Number(c[j + 3]);
    spectra.push(s);
  }
  return { batch, axis, times, spectra };
}

// ---- the site's choices ------------------------------------------------------------------------

export const SITE_UNIT = SITE_DEFAULTS.unit;
export const SITE_PRODUCT = SITE_DEFAULTS.product;
export const SITE_ANALYZER = 'nir-fbd-2';
export const SITE_OWNER = { name: 'pat-engineer', password: 'site-check-password-1', fullName: 'PAT engineer (site check)' };

/**
 * The build settings a PAT engineer would send for this dryer (as docs/ and the README describe
 * them): monitoring on centred spectra with PCs chosen by cross-validation, alarms at 99.9 % with
 * the batch's pace judged, progress on the predicted moisture, a PLS model of the lab moisture
 * (MSC then centring, latent variables chosen by the build, calibrated on the lab values in
 * 0–4 % w/w, near the 2 % target, with the LOD's stated sd), and the endpoint: predicted moisture at or below 2 % w/w,
 * cleared by an automatic margin, confirmed over 2 spectra, with the automatic minimum time and
 * the default holds.
 */
export function siteBuildSettings(): Record<string, unknown> {
  return {
    chain: [{ step: 'scale', center: true, scaling: 'none' }],
    components: 'auto',
    confidence: 0.99,
    progress: { kind: 'indicator', source: 'property' },
    envelope: { k: 3, smoothing: 2, points: 100, band: 'prediction' },
    alarms: { onDelay: 3, onWindow: 5, offDelay: 5, deadband: 0.05, limits: 'local', startupMin: 2, confidence: 0.999, pace: true },
    property: {
      name: 'moisture',
      unit: '% w/w',
      components: 'auto',
      target: SITE_DEFAULTS.moistureTargetPct,
      direction: 'below',
      chain: [{ step: 'msc' }, { step: 'scale', center: true, scaling: 'none' }],
      range: [0, 4],
      // The LOD's standard deviation near the 2 % target, as the site's method validation gives
      // it: simulators/lab-samples.ts draws LOD results with sd √(0.10² + (0.03·w)²) % w/w, 0.117
      // at 2 % w/w. The automatic margin takes it out of RMSECV (docs/model-building.md).
      labSd: 0.12,
    },
    endpoint: { criteria: [{ kind: 'property', margin: 'auto', marginConfidence: 0.7 }], combine: 'all', confirm: 2, nearingMin: 10, minElapsedMin: 'auto' },
  };
}

/** A rule that needs end regions, for the set without lab values: moving-block SD with an automatic threshold. */
export function siteNoLabSettings(): Record<string, unknown> {
  return {
    chain: [{ step: 'scale', center: true, scaling: 'none' }],
    components: 'auto',
    confidence: 0.99,
    progress: { kind: 'time' },
    alarms: { onDelay: 3, onWindow: 5, offDelay: 5, deadband: 0.05, limits: 'local', startupMin: 2, confidence: 0.999 },
    endpoint: { criteria: [{ kind: 'mbsd', block: 5, threshold: 'auto' }], combine: 'all', confirm: 3, nearingMin: 10, minElapsedMin: 'auto' },
  };
}

// ---- judging a streamed batch ------------------------------------------------------------------

export interface EndpointEvent {
  from: string;
  to: string;
  t: number;
  seq: number;
  reason: string;
}

export interface SiteBatchOutcome {
  id: string;
  group: string;
  spectra: number;
  trueEndpointIndex: number | null;
  faultOnsetIndex: number | null;
  /** Index of the spectrum at which the endpoint state became 'done' (null: never). */
  doneIndex: number | null;
  /** doneIndex − true endpoint index, in spectrum intervals (null when either is missing). */
  doneError: number | null;
  /**
   * First spectrum whose true moisture is at or below the approved rule's resolved threshold
   * (target − margin), and done − that index in intervals: how far the call lies from where the
   * rule, given the true moisture, says it should be.
   */
  ruleIndex: number | null;
  doneVsRule: number | null;
  /** The same in minutes of batch time (scan times of the two spectra). */
  doneErrorMin: number | null;
  /** True moisture at the call, % w/w. */
  moistureAtDone: number | null;
  /** The endpoint was held (state 'held') before done, with the reasons given. */
  held: { index: number; reason: string }[];
  /** Confirmed T²/Q conditions standing at the spectrum where 'done' was called. */
  alarmsAtDone: string[];
  /** Every state change, in order (from REST endpoint-events). */
  states: string[];
  /** Index of the first confirmed pace condition (alarm key 'pace'), null when none. */
  paceIndex: number | null;
  /** Index of the first confirmed T² or Q condition, null when none. */
  firstT2QIndex: number | null;
  /** Alarm keys raised during the batch (REST /api/alarms?batch=…). */
  alarmKeys: string[];
  /** T² at the spectrum where 'done' was called beyond the limit its alarm uses (null: never done). */
  t2OverLimitAtDone: boolean | null;
  /** The pace condition stands at or after the spectrum where 'done' was called (null: never done). */
  paceAtOrAfterDone: boolean | null;
  /** Every hold reason code the endpoint gave during the batch. */
  holdCodes: string[];
}

/** What a truth file (truth/<batch>.truth.json, simulators/site-set.ts) says of a batch. */
export interface SiteTruth {
  id: string;
  group: string;
  /** Every scan time, ms epoch (drop-outs included: indices are into this list). */
  times: number[];
  moisture: { values: number[]; target: number };
  endpoint: { index: number } | null;
  faults: { type: string; onsetIndex: number }[];
}

export function readTruth(setDir: string, batch: string): SiteTruth {
  return JSON.parse(readFileSync(join(setDir, 'truth', `${batch}.truth.json`), 'utf8')) as SiteTruth;
}

/** Read one streamed batch back through REST and judge it against its truth file. */
export async function judgeBatch(api: Rest, truth: SiteTruth, ruleThreshold: number | null = null): Promise<SiteBatchOutcome> {
  const b = { id: truth.id, times: truth.times };
  const indexOfT = new Map(b.times.map((t, i) => [t, i]));
  const idx = (t: number) => {
    const i = indexOfT.get(t);
    if (i === undefined) throw new Error(`batch ${b.id}: the server reports a time ${t} that was never streamed`);
    return i;
  };
  const events = (await api.ok<{ items: EndpointEvent[] }>(`/api/batches/${encodeURIComponent(b.id)}/endpoint-events`)).items;
  const results: {
    t: number;
    t2: number;
    limits: { t2: number };
    localLimits: { t2: number } | null;
    alarmLimits?: { t2: number };
    activeConditions: string[];
    endpoint: { state: string; holds?: { code: string }[] };
  }[] = [];
  for (let from = 0; ; ) {
    const page = await api.ok<{ items: typeof results; nextSeq: number | null }>(`/api/batches/${encodeURIComponent(b.id)}/results?fromSeq=${from}&limit=5000`);
    results.push(...page.items);
    if (page.nextSeq === null) break;
    from = page.nextSeq;
  }
  const alarms: { key: string; seq: number | null }[] = [];
  for (let offset = 0; ; offset += 1000) {
    const page = await api.ok<{ items: typeof alarms; total: number }>(`/api/alarms?batch=${encodeURIComponent(b.id)}&limit=1000&offset=${offset}`);
    alarms.push(...page.items);
    if (offset + 1000 >= page.total) break;
  }
  const byIndex = new Map(results.map((r) => [idx(r.t), r]));
  const doneEvent = events.find((e) => e.to === 'done');
  const doneIndex = doneEvent ? idx(doneEvent.t) : null;
  const trueEp = truth.endpoint?.index ?? null;
  const ruleIdx = ruleThreshold === null ? -1 : truth.moisture.values.findIndex((v) => v <= ruleThreshold);
  const ruleIndex = ruleIdx < 0 ? null : ruleIdx;
  const doneError = doneIndex !== null && trueEp !== null ? doneIndex - trueEp : null;
  const atDone = doneIndex !== null ? byIndex.get(doneIndex) : undefined;
  const firstWith = (keys: string[]) => {
    for (const r of results) if (r.activeConditions.some((k) => keys.includes(k))) return idx(r.t);
    return null;
  };
  return {
    id: b.id,
    group: truth.group,
    spectra: results.length,
    trueEndpointIndex: trueEp,
    faultOnsetIndex: truth.faults[0]?.onsetIndex ?? null,
    doneIndex,
    doneError,
    ruleIndex,
    doneVsRule: doneIndex !== null && ruleIndex !== null ? doneIndex - ruleIndex : null,
    doneErrorMin: doneIndex === null || trueEp === null ? null : (b.times[doneIndex]! - b.times[trueEp]!) / 60_000,
    moistureAtDone: doneIndex === null ? null : truth.moisture.values[doneIndex]!,
    held: events.filter((e) => e.to === 'held').map((e) => ({ index: idx(e.t), reason: e.reason })),
    alarmsAtDone: atDone ? atDone.activeConditions.filter((k) => k === 't2' || k === 'q') : [],
    states: events.map((e) => e.to),
    paceIndex: firstWith(['pace']),
    firstT2QIndex: firstWith(['t2', 'q']),
    alarmKeys: [...new Set(alarms.map((a) => a.key))].sort(),
    t2OverLimitAtDone: atDone ? atDone.t2 > (atDone.alarmLimits ?? atDone.localLimits ?? atDone.limits).t2 : null,
    paceAtOrAfterDone: doneIndex === null ? null : results.some((r) => idx(r.t) >= doneIndex && r.activeConditions.includes('pace')),
    holdCodes: [...new Set(results.flatMap((r) => (r.endpoint.holds ?? []).map((h) => h.code)))].sort(),
  };
}

// ---- figures -------------------------------------------------------------------------------------

export interface SiteFigures {
  /**
   * Largest (true − done) over the good test batches, in minutes of batch time (≤ 0: never early),
   * and the same in spectrum intervals.
   */
  site_endpoint_early_max: number | null;
  site_endpoint_early_max_intervals: number | null;
  /** Median (done − true) over the good test batches, in minutes (> 0: late); and in intervals. */
  site_endpoint_error_median: number | null;
  site_endpoint_error_median_intervals: number | null;
  /** Largest |done − true| over every batch called done without a hold, intervals. */
  site_endpoint_error_abs_max_intervals: number | null;
  /**
   * Largest |done − rule crossing| over every batch called done without a hold first, intervals:
   * the rule crossing is the first spectrum whose true moisture is at or below the approved
   * rule's resolved threshold (target − margin).
   */
  site_endpoint_vs_rule_abs_max_intervals: number | null;
  /** Batches (any group) called done while a confirmed T² or Q condition stood. */
  site_done_while_alarm: number;
  /** Good test batches never called done. */
  site_endpoint_missed: number;
  /** Batches called done although their true endpoint was never reached. */
  site_done_without_endpoint: number;
  /** Slow-drying batches flagged by pace at or after the fault's onset / slow-drying batches. */
  site_pace_detected: number;
  site_pace_batches: number;
  /** Slow-drying batches called done whose pace flag did not stand at or after the call. */
  site_pace_lost_at_done: number;
  /** Good test batches with a pace alarm. */
  site_pace_false: number;
  /** True moisture at the calls on good batches, % w/w. */
  site_moisture_at_done: { median: number; min: number; max: number } | null;
  /** Batches whose endpoint was held before done (any reason). */
  site_held_batches: number;
  site_interval_s: number;
  site_test_batches: number;
  site_reference_batches: number;
}

const median = (v: number[]) => {
  if (v.length === 0) return null;
  const s = [...v].sort((a, b) => a - b);
  const m = s.length >> 1;
  return s.length % 2 ? s[m]! : (s[m - 1]! + s[m]!) / 2;
};

export function siteFigures(outcomes: SiteBatchOutcome[], intervalS: number, referenceBatches: number): SiteFigures {
  const good = outcomes.filter((o) => o.group === 'good');
  const goodErr = good.flatMap((o) => (o.doneError === null ? [] : [o.doneError]));
  const unheld = outcomes.filter((o) => o.doneError !== null && o.held.length === 0);
  const atCall = good.flatMap((o) => (o.moistureAtDone === null ? [] : [o.moistureAtDone]));
  const slow = outcomes.filter((o) => o.group === 'slow-drying');
  const medianErr = median(goodErr);
  const goodMin = good.flatMap((o) => (o.doneErrorMin === null ? [] : [o.doneErrorMin]));
  return {
    site_endpoint_early_max: goodMin.length ? Math.max(...goodMin.map((e) => -e)) : null,
    site_endpoint_early_max_intervals: goodErr.length ? Math.max(...goodErr.map((e) => -e)) : null,
    site_endpoint_error_median: median(goodMin),
    site_endpoint_error_median_intervals: medianErr,
    site_endpoint_error_abs_max_intervals: unheld.length ? Math.max(...unheld.map((o) => Math.abs(o.doneError!))) : null,
    site_endpoint_vs_rule_abs_max_intervals: unheld.some((o) => o.doneVsRule !== null) ? Math.max(...unheld.flatMap((o) => (o.doneVsRule === null ? [] : [Math.abs(o.doneVsRule)]))) : null,
    site_done_while_alarm: outcomes.filter((o) => o.alarmsAtDone.length > 0).length,
    site_endpoint_missed: good.filter((o) => o.trueEndpointIndex !== null && o.doneIndex === null).length,
    site_done_without_endpoint: outcomes.filter((o) => o.trueEndpointIndex === null && o.doneIndex !== null).length,
    site_pace_detected: slow.filter((o) => o.paceIndex !== null && (o.faultOnsetIndex === null || o.paceIndex >= o.faultOnsetIndex)).length,
    site_pace_batches: slow.length,
    site_pace_lost_at_done: slow.filter((o) => o.paceAtOrAfterDone === false).length,
    site_pace_false: good.filter((o) => o.paceIndex !== null).length,
    site_moisture_at_done: atCall.length ? { median: median(atCall)!, min: Math.min(...atCall), max: Math.max(...atCall) } : null,
    site_held_batches: outcomes.filter((o) => o.held.length > 0).length,
    site_interval_s: intervalS,
    site_test_batches: outcomes.length,
    site_reference_batches: referenceBatches,
  };
}

// ---- the whole run -------------------------------------------------------------------------------

export interface PreparedSiteSet {
  set: SiteSet;
  /** Folder the set's files are in. */
  setDir: string;
  files: ReturnType<typeof writeSiteSet>;
}

/** Simulate the site set and write its files to `dir`/set. */
export function prepareSiteSet(dir: string, opts: SiteSetOptions): PreparedSiteSet {
  const setDir = join(dir, 'set');
  const set = simulateSiteSet(opts);
  return { set, setDir, files: writeSiteSet(setDir, set) };
}

export interface SiteCheckOptions {
  /** Work folder (the data folders); created if missing. */
  dir: string;
  prepared: PreparedSiteSet;
  /** Build settings instead of siteBuildSettings() (for trying other rules). */
  settings?: Record<string, unknown>;
  log?: (line: string) => void;
}

export interface SiteCheckResult {
  set: SiteSet;
  version: { versionId: string; name: string; version: number };
  /** GET /api/models/versions/:id as the server answered it. */
  detail: Record<string, any>;
  /** The approval: refused first (with this answer) when the rule fired early on reference batches. */
  approval: { firstStatus: number; firstDetail: string | null; overrideUsed: boolean };
  outcomes: SiteBatchOutcome[];
  figures: SiteFigures;
  /** Wall time of each stage, ms. */
  timings: Record<string, number>;
  serverLog: string;
}

function batchRecord(dir: string): Map<string, { start: string; stop: string }> {
  const lines = readFileSync(join(dir, 'batch-record.csv'), 'utf8').trimEnd().split('\n').slice(1);
  return new Map(lines.map((l) => l.split(',')).map((c) => [c[0]!, { start: c[2]!, stop: c[3]! }]));
}

/** `tideline <args>` without blocking (for several imports at once). */
export function tidelineAsync(dataDir: string, args: string[], input?: string): Promise<CliResult> {
  return new Promise((resolve, reject) => {
    const child = spawn(process.execPath, ['--import', 'tsx', CLI, ...args, '--data-dir', dataDir], { cwd: ROOT, stdio: [input === undefined ? 'ignore' : 'pipe', 'pipe', 'pipe'] });
    if (input !== undefined) child.stdin!.end(input);
    let stdout = '';
    let stderr = '';
    child.stdout!.on('data', (d) => (stdout += d));
    child.stderr!.on('data', (d) => (stderr += d));
    child.once('error', reject);
    child.once('close', (code) => resolve({ status: code ?? -1, stdout, stderr }));
  });
}

/**
 * One CLI import per reference file, with the batch start from the batch record as the origin (the
 * files hold elapsed seconds only). Two at a time: each is its own process and transaction.
 */
export async function importReferences(dataDir: string, files: string[], record: Map<string, { start: string }>): Promise<CliResult[]> {
  const out: CliResult[] = new Array(files.length);
  let next = 0;
  const worker = async () => {
    while (next < files.length) {
      const k = next++;
      const f = files[k]!;
      const id = f.replace(/^.*[\\/]/, '').replace(/\.csv$/, '');
      const start = record.get(id)?.start;
      if (!start) throw new Error(`batch ${id} is not in the batch record`);
      const args = ['import', '--unit', SITE_UNIT, '--product', SITE_PRODUCT, '--origin', start, '--by', SITE_OWNER.name, f];
      const r = await tidelineAsync(dataDir, args);
      if (r.status !== 0) throw new Error(`tideline ${args.join(' ')} exited ${r.status}: ${r.stdout}${r.stderr}`);
      out[k] = r;
    }
  };
  await Promise.all([worker(), worker()]);
  return out;
}

/** Unit, analyzer and model owner through the command line (three processes at once); returns the analyzer's token. */
export async function setUpInstallation(dataDir: string): Promise<string> {
  // The database and its migrations first, so the three commands below do not race to create them.
  mustRun(dataDir, ['migrate']);
  const must = async (args: string[], input?: string) => {
    const r = await tidelineAsync(dataDir, args, input);
    if (r.status !== 0) throw new Error(`tideline ${args.join(' ')} exited ${r.status}: ${r.stdout}${r.stderr}`);
    return r;
  };
  const [, a] = await Promise.all([
    must(['unit', 'add', SITE_UNIT, '--kind', 'dryer', '--name', 'Fluid-bed dryer 2']),
    must(['analyzer', 'add', SITE_ANALYZER, '--name', 'FBD-2 NIR probe']),
    must(['user', 'add', '--role', 'model-owner', '--full-name', SITE_OWNER.fullName, '--password-stdin', SITE_OWNER.name], SITE_OWNER.password),
  ]);
  return a.stdout.trim().split('\n').pop()!.trim();
}

export async function runSiteCheck(opts: SiteCheckOptions): Promise<SiteCheckResult> {
  const log = opts.log ?? (() => {});
  const timings: Record<string, number> = {};
  let t = performance.now();
  const lap = (name: string) => {
    const now = performance.now();
    timings[name] = Math.round(now - t);
    log(`${name}: ${timings[name]} ms`);
    t = now;
  };
  mkdirSync(opts.dir, { recursive: true });
  const { set, setDir, files } = opts.prepared;

  const dataDir = join(opts.dir, 'data');
  mkdirSync(dataDir, { recursive: true });
  const token = await setUpInstallation(dataDir);
  lap('setup');
  const server = await startServerProcess(dataDir);
  lap('serve');
  try {
    await importReferences(dataDir, files.reference, batchRecord(setDir));
    lap('import');
    log(`imported ${files.reference.length} reference files through the command line`);

    const api = new Rest(server.url);
    await api.login(SITE_OWNER.name, SITE_OWNER.password);
    const build = await api.post('/api/models/build', {
      name: 'fbd2-granulate-k7',
      product: SITE_PRODUCT,
      referenceBatches: set.reference.map((sb) => sb.batch.id),
      settings: opts.settings ?? siteBuildSettings(),
    });
    if (build.status !== 201) throw new Error(`POST /api/models/build answered ${build.status}: ${JSON.stringify(build.body)}`);
    const version = build.body as { versionId: string; name: string; version: number };
    lap('build');
    const detail = await api.ok(`/api/models/versions/${encodeURIComponent(version.versionId)}`);
    log(`built ${version.name} v${version.version}`);

    const reason = 'Site check: model built from the FBD-2 reference batches with LOD moisture; approved for the end-to-end check.';
    let approve = await api.post(`/api/models/versions/${encodeURIComponent(version.versionId)}/approve`, { reason, password: SITE_OWNER.password });
    const approval = { firstStatus: approve.status, firstDetail: approve.status === 200 ? null : String(approve.body?.detail ?? JSON.stringify(approve.body)), overrideUsed: false };
    if (approve.status === 422) {
      // The build's leave-one-batch-out check found the rule early on a reference batch: approving
      // needs a signed override. The check goes on (to measure what the rule does at run time), and
      // says so in its result.
      approval.overrideUsed = true;
      approve = await api.post(`/api/models/versions/${encodeURIComponent(version.versionId)}/approve`, {
        reason,
        password: SITE_OWNER.password,
        earlyEndpointOverride: 'Site check: approved despite the early reference-batch calls to measure the rule on the test batches; not for production.',
      });
    }
    if (approve.status !== 200) throw new Error(`approval answered ${approve.status}: ${JSON.stringify(approve.body)}`);
    const deploy = await api.post('/api/deployments', { unit: SITE_UNIT, versionId: version.versionId, reason: 'site check' });
    if (deploy.status !== 201) throw new Error(`POST /api/deployments answered ${deploy.status}: ${JSON.stringify(deploy.body)}`);
    lap('approve-deploy');

    // The test batches as the analyzer would send them: read from the site's files (spectra file,
    // batch start from the batch record), streamed by the client written from docs/protocol.md.
    const record = batchRecord(setDir);
    const client = new DocsIngestClient({ url: server.url.replace(/^http/, 'ws') + '/ingest', token, analyzer: SITE_ANALYZER, axis: set.axis });
    try {
      await client.connect();
      for (const f of files.test) {
        const id = f.replace(/^.*[\\/]/, '').replace(/\.csv$/, '');
        const start = record.get(id)?.start;
        if (!start) throw new Error(`batch ${id} is not in the batch record`);
        const b = readSiteFile(readFileSync(f, 'utf8'), Date.parse(start));
        if (b.axis.join() !== set.axis.join()) throw new Error(`${f}: the wavelength header is not the analyzer's axis`);
        await client.sendBatch({ unit: SITE_UNIT, batch: b.batch, product: SITE_PRODUCT, times: b.times, spectra: b.spectra });
      }
    } finally {
      await client.close();
    }
    lap('stream');
    log(`streamed ${files.test.length} test batches through /ingest`);

    const outcomes: SiteBatchOutcome[] = [];
    // The approved rule's resolved moisture threshold (target − margin), as the version states it.
    const crit = (detail.endpoint?.criteria ?? []).find((c: { kind: string }) => c.kind === 'property') as { threshold: number } | undefined;
    const threshold = crit && detail.property?.direction === 'below' ? crit.threshold : null;
    for (const sb of set.test) outcomes.push(await judgeBatch(api, readTruth(setDir, sb.batch.id), threshold));
    lap('read-back');
    return { set, version, detail, approval, outcomes, figures: siteFigures(outcomes, set.intervalS, set.reference.length), timings, serverLog: server.log() };
  } finally {
    await server.stop();
  }
}

// ---- the set without its lab column ----------------------------------------------------------------

/** A spectra file without its third column (the lab moisture), as a site without lab data would have it. */
export function withoutLabColumn(text: string): string {
  return text
    .split('\n')
    .map((l) => {
      if (l === '') return l;
      const a = l.indexOf(',');
      const b = l.indexOf(',', a + 1);
      const c = l.indexOf(',', b + 1);
      return l.slice(0, b) + l.slice(c);
    })
    .join('\n');
}

/** An endpoint marked by the model owner (build setting referenceEndpoints). */
export type ReferenceMark = { batch: string; note: string } & ({ elapsedMin: number; last?: undefined } | { last: true; elapsedMin?: undefined });

export interface NoLabResult {
  refused: Answer;
  /** Marks the user gave, from the lab sheet (see runNoLabCheck). */
  marks: ReferenceMark[];
  built: Answer;
  detail: Record<string, any> | null;
  timings: Record<string, number>;
}

/**
 * The same reference batches with the moisture column removed: a rule that needs end regions must be
 * refused with the batches named (not fitted on the last spectra); with endpoints marked by the
 * user it builds.
 */
export async function runNoLabCheck(opts: { dir: string; prepared: PreparedSiteSet; log?: (l: string) => void }): Promise<NoLabResult> {
  const log = opts.log ?? (() => {});
  const { set, setDir } = opts.prepared;
  const timings: Record<string, number> = {};
  let t = performance.now();
  const lap = (name: string) => {
    const now = performance.now();
    timings[name] = Math.round(now - t);
    log(`${name}: ${timings[name]} ms`);
    t = now;
  };
  const noLabDir = join(opts.dir, 'reference-without-lab');
  mkdirSync(noLabDir, { recursive: true });
  const files = set.reference.map((sb) => {
    const f = join(noLabDir, `${sb.batch.id}.csv`);
    writeFileSync(f, withoutLabColumn(readFileSync(join(setDir, 'reference', `${sb.batch.id}.csv`), 'utf8')));
    return f;
  });
  const dataDir = join(opts.dir, 'data-without-lab');
  mkdirSync(dataDir, { recursive: true });
  await setUpInstallation(dataDir);
  const server = await startServerProcess(dataDir);
  try {
    await importReferences(dataDir, files, batchRecord(setDir));
    lap('import');
    const api = new Rest(server.url);
    await api.login(SITE_OWNER.name, SITE_OWNER.password);
    const ids = set.reference.map((sb) => sb.batch.id);
    const refused = await api.post('/api/models/build', { name: 'fbd2-no-lab', product: SITE_PRODUCT, referenceBatches: ids, settings: siteNoLabSettings() });
    lap('build-refused');
    // The user marks each endpoint from the lab sheet: where the moisture, interpolated linearly in
    // time between the last LOD result above the target and the first at or below it, crosses the
    // target (to 0.1 min) — the last spectrum, said so, when that falls after it.
    const labRows = readFileSync(join(setDir, 'lab-results.csv'), 'utf8').trimEnd().split('\n').slice(1).map((l) => l.split(','));
    const target = SITE_DEFAULTS.moistureTargetPct;
    const marks = set.reference.map((sb): ReferenceMark => {
      const rows = labRows.filter((r) => r[0] === sb.batch.id).map((r) => ({ min: (Date.parse(r[1]!) - sb.batch.start) / 60_000, v: Number(r[2]) }));
      const k = rows.findIndex((r) => r.v <= target);
      if (k < 0) throw new Error(`batch ${sb.batch.id}: no LOD result at or below the target in the lab sheet`);
      const below = rows[k]!;
      const above = k > 0 ? rows[k - 1]! : null;
      const crossing = above ? above.min + ((above.v - target) / (above.v - below.v)) * (below.min - above.min) : below.min;
      const lastMin = (sb.batch.times[sb.batch.times.length - 1]! - sb.batch.start) / 60_000;
      const note = above ? `LOD ${above.v} % w/w at ${above.min} min, ${below.v} % w/w at ${below.min} min` : `first LOD ${below.v} % w/w at ${below.min} min`;
      if (crossing > lastMin) return { batch: sb.batch.id, last: true, note: `${note}: the crossing falls after the last spectrum` };
      return { batch: sb.batch.id, elapsedMin: Math.round(crossing * 10) / 10, note };
    });
    const built = await api.post('/api/models/build', { name: 'fbd2-no-lab', product: SITE_PRODUCT, referenceBatches: ids, settings: { ...siteNoLabSettings(), referenceEndpoints: marks } });
    lap('build-marked');
    const detail = built.status === 201 ? await api.ok(`/api/models/versions/${encodeURIComponent((built.body as { versionId: string }).versionId)}`) : null;
    return { refused, marks, built, detail, timings };
  } finally {
    await server.stop();
  }
}
