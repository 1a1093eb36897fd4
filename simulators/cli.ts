/**
 * Command line of the simulators: write simulated batches to files, or stream them live to a
 * Tideline server over the ingest protocol. `npm run sim -- --help` explains every option.
 */
import { parseArgs } from 'node:util';
import { linearAxis } from './bands.ts';
import { simulateReferenceSet } from './batch.ts';
import { FAULT_INFO, FAULT_TYPES, parseFaultArg, resolveFaults, type FaultSpec, type ProcessKind } from './faults.ts';
import { writeBatchFiles } from './files.ts';
import { readTokensFile, runStreams, type AnalyzerIdentity } from './load.ts';
import { parseStatusWindow, type StatusWindow } from './stream-client.ts';
import { SITE_DEFAULTS, SITE_FAULTS, simulateSiteSet, writeSiteSet } from './site-set.ts';

export const USAGE = `Tideline simulators: simulated inline NIR analyzers on a fluid-bed dryer and a batch reactor,
deterministic by seed, with ground truth for every spectrum and optional faults.

Usage:
  npm run sim -- dryer|reactor --out DIR [--batches N] [--seed S] [options]
      Write N batches to DIR: <kind>-spectra.csv (first row: batch,index,t_ms,elapsed_s and the
      wavelengths in nm; then one row per spectrum), <batch>.truth.json per batch (property per
      spectrum, true endpoint, faults with onsets, dropped spectra, process state) and
      <kind>-spectra.manifest.json. The same seed gives identical bytes.
  npm run sim -- stream dryer|reactor --url ws://HOST:PORT/ingest (--token T | --tokens-file FILE) [options]
      Stream simulated batches live over the Tideline ingest protocol (v1): hello, batch-start,
      spectra, batch-end with contiguous seq; waits for acks; reconnects and resends what was not
      acked. With --analyzers N (load mode) runs N analyzers at once. Ctrl-C ends the
      open batches ("stopped by operator") and waits for their acks.
  npm run sim -- site --out DIR [--seed S] [--reference N] [--good N] [--per-fault N]
      Write a site-style dryer set to DIR, as a site has its files rather than as the simulator
      writes its own: another instrument (line shape, stray light, noise), a ${SITE_DEFAULTS.axis.points}-point axis
      ${SITE_DEFAULTS.axis.from}–${SITE_DEFAULTS.axis.to} nm rounded to 0.01 nm, a spectrum every ${SITE_DEFAULTS.intervalS} s as elapsed seconds,
      loss-on-drying moisture on a few spectra per batch, operators stopping 5–15 min after the
      true endpoint. reference/<batch>.csv (header batch,time_s,${SITE_DEFAULTS.propertyHeader},<nm>…),
      test/<batch>.csv (good batches and one set per fault type), batch-record.csv, lab-results.csv,
      truth/<batch>.truth.json and site-set.json. Defaults: ${SITE_DEFAULTS.reference} reference, ${SITE_DEFAULTS.good} good test
      batches, ${SITE_DEFAULTS.perFault} per fault type (${SITE_FAULTS.join(', ')}).
      The same seed gives identical bytes. simulators/site-set.ts describes every choice.
  npm run sim -- faults
      List the fault types and their parameters.
  npm run sim -- --help

Options (files and stream):
  --seed S            integer 0…4294967295; each batch derives its own seed from it (default 1)
  --batches N         files: number of batches (default 20);
                      stream: batches per analyzer, one after another (default 1; 0 = until Ctrl-C)
  --fault SPEC        inject a fault: TYPE@MINUTES[:name=value,...], onset in process minutes after
                      batch start, e.g. --fault probe-fouling@25:tauMin=10. Repeat for several faults.
                      Types: ${FAULT_TYPES.join(', ')}
  --faulty-batches L  files only: comma-separated batch numbers (1-based) that get the faults
                      (default: every batch)
  --interval S        seconds between spectra (default: dryer 10, reactor 20)
  --axis FROM:TO:N    wavelength axis in nm with N points (default: dryer 950:1650:256,
                      reactor 1100:2300:601)
  --unit U            unit named in the data (default: dryer-1 / reactor-1; in load mode with
                      --token, U-1 … U-N)
  --product P         product named in the data (default: granulate-TL40 / amide-TL7)

Options (files):
  --out DIR           folder to write into (created if missing; files of the same name are replaced)

Options (stream):
  --url URL           ws:// or wss:// address of the server's /ingest endpoint (required)
  --token T           the analyzer's token, sent as "Authorization: Bearer T" at upgrade
  --tokens-file FILE  one analyzer per line: "ANALYZER TOKEN [UNIT]" (# starts a comment); used
                      for load mode, where every analyzer needs its own token
  --analyzer ID       analyzer id sent in hello (default sim-<kind>-1; in load mode with --token,
                      ID-1 … ID-N)
  --analyzers N       load mode: stream from N analyzers at once (default 1, or every line of
                      --tokens-file)
  --speed X           pace at X times real time: 1 = real time (a spectrum every 10 s for the
                      dryer), 60 = an hour of process per minute; 0 = as fast as acks allow
                      (default 1). Timestamps always advance by process time from the moment
                      streaming starts, so above ×1 they run ahead of the wall clock: start the
                      server with a wider window (--ingest.max-ahead-ms none) or it refuses them
                      as time-implausible.
  --json              send spectra as JSON messages instead of binary frames
  --status SPEC       analyzer status window (NAMUR NE 107): STATUS@FROM-TO[:code], minutes after
                      batch start, e.g. function-check@20-25:probe-cleaning (no spectra inside a
                      function-check window; 'good' again at TO). Repeat for several windows.
  --window N          maximum spectra in flight without an ack (default 64)
  --boot N            boot epoch to announce (default: now, ms); every analyzer's seq counts
                      from 0 within its boot epoch (load mode uses N, N+1, …)
  --quiet             print only the summary

The simulated batches are an invented scenario for commissioning, demos and tests; they do not
describe any real product or plant.`;

function fail(message: string): never {
  process.stderr.write(`sim: ${message}\nRun "npm run sim -- --help" for the options.\n`);
  process.exit(2);
}

function intOpt(v: string | undefined, name: string, dflt: number, min: number, max: number): number {
  if (v === undefined) return dflt;
  const n = Number(v);
  if (!Number.isInteger(n) || n < min || n > max) fail(`--${name} ${v}: expected an integer ${min}…${max}`);
  return n;
}

function numOpt(v: string | undefined, name: string, dflt: number, min: number): number {
  if (v === undefined) return dflt;
  const n = Number(v);
  if (!Number.isFinite(n) || n < min) fail(`--${name} ${v}: expected a number ≥ ${min}`);
  return n;
}

function parseAxis(v: string | undefined): number[] | undefined {
  if (v === undefined) return undefined;
  const m = /^([0-9.]+):([0-9.]+):([0-9]+)$/.exec(v);
  if (!m) fail(`--axis ${v}: expected FROM:TO:N, e.g. 950:1650:256`);
  try {
    return linearAxis(Number(m[1]), Number(m[2]), Number(m[3]));
  } catch (e) {
    fail(`--axis ${v}: ${(e as Error).message}`);
  }
}

function faultsList(): string {
  const lines: string[] = ['Fault types (TYPE@MINUTES[:name=value,...]):', ''];
  for (const t of FAULT_TYPES) {
    const f = FAULT_INFO[t];
    lines.push(`  ${t}  (${f.kinds.join(', ')})`);
    lines.push(`      ${f.description}`);
    for (const [name, p] of Object.entries(f.params)) lines.push(`      ${name} = ${p.default}  ${p.description} (${p.min}…${p.max})`);
    lines.push('');
  }
  return lines.join('\n');
}

async function main(argv: string[]): Promise<void> {
  let parsed;
  try {
    parsed = parseArgs({
      args: argv,
      allowPositionals: true,
      options: {
        help: { type: 'boolean', short: 'h' },
        seed: { type: 'string' },
        batches: { type: 'string' },
        fault: { type: 'string', multiple: true },
        'faulty-batches': { type: 'string' },
        interval: { type: 'string' },
        axis: { type: 'string' },
        unit: { type: 'string' },
        product: { type: 'string' },
        out: { type: 'string' },
        url: { type: 'string' },
        token: { type: 'string' },
        'tokens-file': { type: 'string' },
        analyzer: { type: 'string' },
        analyzers: { type: 'string' },
        speed: { type: 'string' },
        json: { type: 'boolean' },
        status: { type: 'string', multiple: true },
        window: { type: 'string' },
        boot: { type: 'string' },
        quiet: { type: 'boolean' },
        reference: { type: 'string' },
        good: { type: 'string' },
        'per-fault': { type: 'string' },
      },
    });
  } catch (e) {
    fail((e as Error).message);
  }
  const { values: v, positionals } = parsed;
  if (v.help || positionals.length === 0) {
    process.stdout.write(USAGE + '\n');
    return;
  }
  const [command, kindArg] = positionals;
  if (command === 'faults') {
    process.stdout.write(faultsList());
    return;
  }
  if (command === 'site') {
    if (!v.out) fail('--out DIR is required to write the site set');
    for (const k of ['fault', 'faulty-batches', 'interval', 'axis', 'unit', 'product', 'url', 'token', 'tokens-file', 'analyzer', 'analyzers', 'speed', 'json', 'window', 'boot', 'status', 'batches'] as const) {
      if (v[k] !== undefined) fail(`--${k} does not apply to "site" (its axis, interval and faults are fixed: see --help)`);
    }
    if (positionals.length > 1) fail(`unexpected argument "${positionals[1]}"`);
    const set = simulateSiteSet({
      seed: intOpt(v.seed, 'seed', 1, 0, 0xffffffff),
      reference: intOpt(v.reference, 'reference', SITE_DEFAULTS.reference, 2, 1000),
      good: intOpt(v.good, 'good', SITE_DEFAULTS.good, 0, 1000),
      perFault: intOpt(v['per-fault'], 'per-fault', SITE_DEFAULTS.perFault, 0, 1000),
    });
    const w = writeSiteSet(v.out, set);
    if (!v.quiet) {
      for (const sb of [...set.reference, ...set.test]) {
        const b = sb.batch;
        const ep = b.truth.endpointIndex === null ? 'not reached' : `at ${((b.truth.endpointT! - b.start) / 60000).toFixed(1)} min`;
        const stop = sb.stopAfterEndpointMin === null ? '' : `, stopped ${sb.stopAfterEndpointMin.toFixed(1)} min later`;
        process.stdout.write(`${b.id} (${sb.role}, ${sb.group}): ${b.spectra.length - b.truth.dropped.length} spectra, endpoint ${ep}${stop}, ${sb.lab.length} lab values\n`);
      }
    }
    process.stdout.write(`wrote ${w.reference.length} reference and ${w.test.length} test batch files, ${w.truth.length} truth files, ${w.batchRecord}, ${w.labResults} and ${w.manifest}\n`);
    return;
  }
  for (const k of ['reference', 'good', 'per-fault'] as const) if (v[k] !== undefined) fail(`--${k} applies to "site" only`);
  const streaming = command === 'stream';
  const kind = (streaming ? kindArg : command) as ProcessKind;
  if (kind !== 'dryer' && kind !== 'reactor') fail(`unknown ${streaming ? 'process' : 'command'} "${streaming ? kindArg ?? '' : command}"; use dryer or reactor`);
  if (positionals.length > (streaming ? 2 : 1)) fail(`unexpected argument "${positionals[streaming ? 2 : 1]}"`);

  const seed = intOpt(v.seed, 'seed', 1, 0, 0xffffffff);
  let faults: FaultSpec[] | undefined;
  try {
    faults = v.fault?.map(parseFaultArg);
    if (faults) resolveFaults(kind, faults);
  } catch (e) {
    fail(`--fault: ${(e as Error).message}`);
  }
  const intervalS = v.interval === undefined ? undefined : numOpt(v.interval, 'interval', 0, 0.001);
  const axis = parseAxis(v.axis);

  if (!streaming) {
    if (!v.out) fail('--out DIR is required to write files');
    for (const k of ['url', 'token', 'tokens-file', 'analyzer', 'analyzers', 'speed', 'json', 'window', 'boot', 'status'] as const) {
      if (v[k] !== undefined) fail(`--${k} applies to "stream" only`);
    }
    const n = intOpt(v.batches, 'batches', 20, 1, 10000);
    let faultMap: Record<number, FaultSpec[]> | undefined;
    if (faults) {
      const which = v['faulty-batches']
        ? v['faulty-batches'].split(',').map((s) => intOpt(s.trim(), 'faulty-batches', 0, 1, n) - 1)
        : Array.from({ length: n }, (_, i) => i);
      faultMap = Object.fromEntries(which.map((i) => [i, faults!]));
    } else if (v['faulty-batches']) fail('--faulty-batches needs at least one --fault');
    const batches = simulateReferenceSet(kind, n, seed, { faults: faultMap, axis, intervalS, unit: v.unit, product: v.product });
    const written = writeBatchFiles(v.out, batches);
    if (!v.quiet) {
      for (const b of batches) {
        const ep = b.truth.endpointIndex === null ? 'not reached' : `at ${((b.truth.endpointT! - b.start) / 60000).toFixed(1)} min`;
        const fl = b.truth.faults.map((f) => `${f.type}@${((f.onsetT - b.start) / 60000).toFixed(1)}min`).join(' ');
        process.stdout.write(`${b.id}: ${b.spectra.length} spectra, endpoint ${ep}${fl ? `, faults ${fl}` : ''}\n`);
      }
    }
    process.stdout.write(`wrote ${written.csv}, ${written.truth.length} truth files and ${written.manifest}\n`);
    return;
  }

  if (v.out) fail('--out applies to files only, not to "stream"');
  if (v['faulty-batches']) fail('--faulty-batches applies to files only');
  if (!v.url) fail('--url is required, e.g. --url ws://127.0.0.1:8080/ingest');
  let statusWindows: StatusWindow[] = [];
  try {
    statusWindows = (v.status ?? []).map(parseStatusWindow);
  } catch (e) {
    fail(`--status: ${(e as Error).message}`);
  }
  if (!v.token && !v['tokens-file']) fail('give --token T or --tokens-file FILE');
  if (v.token && v['tokens-file']) fail('give either --token or --tokens-file, not both');
  let identities: AnalyzerIdentity[];
  if (v['tokens-file']) {
    try {
      identities = readTokensFile(v['tokens-file']);
    } catch (e) {
      fail((e as Error).message);
    }
    const n = intOpt(v.analyzers, 'analyzers', identities.length, 1, identities.length);
    identities = identities.slice(0, n);
    if (v.analyzer) fail('--analyzer is taken from the tokens file; drop it');
  } else {
    const n = intOpt(v.analyzers, 'analyzers', 1, 1, 1000);
    const base = v.analyzer ?? `sim-${kind}-1`;
    const unitBase = v.unit ?? `${kind}`;
    identities =
      n === 1
        ? [{ analyzer: base, token: v.token!, ...(v.unit ? { unit: v.unit } : {}) }]
        : Array.from({ length: n }, (_, k) => ({ analyzer: `${v.analyzer ?? `sim-${kind}`}-${k + 1}`, token: v.token!, unit: `${unitBase}-${k + 1}` }));
  }
  if (v.unit && v['tokens-file']) identities = identities.map((id) => ({ ...id, unit: id.unit ?? v.unit }));
  const speed = numOpt(v.speed, 'speed', 1, 0);
  const batches = intOpt(v.batches, 'batches', 1, 0, 1_000_000);
  const window = intOpt(v.window, 'window', 64, 1, 100000);
  const boot = v.boot === undefined ? undefined : intOpt(v.boot, 'boot', 0, 0, Number.MAX_SAFE_INTEGER);
  const stop = new AbortController();
  process.on('SIGINT', () => {
    if (stop.signal.aborted) {
      process.stderr.write('quitting without waiting for acks\n');
      process.exit(130);
    }
    process.stderr.write('ending the open batch(es) and waiting for the acks (Ctrl-C again to quit at once)\n');
    stop.abort();
  });
  const quiet = v.quiet ?? false;
  const log = quiet ? undefined : (line: string) => process.stderr.write(line + '\n');
  try {
    const r = await runStreams({
      url: v.url,
      kind,
      identities,
      batches,
      seed,
      speed,
      binary: !v.json,
      window,
      product: v.product,
      faults,
      ...(statusWindows.length ? { statusWindows } : {}),
      axis,
      intervalS,
      boot,
      log,
      signal: stop.signal,
      onBatch: quiet ? undefined : (a, b, n, st) => process.stdout.write(`${a}: batch ${b} ${st ? 'stopped early' : 'streamed'} and acked (${n} spectra)\n`),
    });
    const resent = r.perAnalyzer.reduce((s, a) => s + a.stats.resent, 0);
    const reconnects = r.perAnalyzer.reduce((s, a) => s + a.stats.reconnects, 0);
    const rate = r.wallMs > 0 ? (r.spectra / r.wallMs) * 1000 : 0;
    process.stdout.write(
      `${r.analyzers} analyzer(s), ${r.batches} batch(es), ${r.spectra} spectra in ${(r.wallMs / 1000).toFixed(1)} s ` +
        `(${rate.toFixed(0)} spectra/s); ${reconnects} reconnect(s), ${resent} entries resent\n`,
    );
  } catch (e) {
    process.stderr.write(`sim: ${(e as Error).message}\n`);
    process.exit(1);
  }
  process.exit(0);
}

main(process.argv.slice(2)).catch((e) => {
  process.stderr.write(`sim: ${(e as Error).stack ?? String(e)}\n`);
  process.exit(1);
});
