/**
 * Benchmarks: runs every module in bench/sections/*.ts (each exports `name` and
 * `async run(ctx)` returning figures), prints the machine's details and each figure, and with
 * `--json FILE` writes all figures into one JSON document.
 *
 *   npm run bench                      all sections
 *   npm run bench -- --json out.json   also write the figures
 *   npm run bench -- --quick           smaller sizes (figures then say so)
 *   npm run bench -- --only core-pca   one section (repeatable)
 *   npm run bench -- --history-size 100x500x1024   plant-history size (default 500x500x1024)
 *
 * Ratios are measured in the same run on the same machine; no timing is asserted anywhere.
 */
import { execFileSync } from 'node:child_process';
import { readdirSync, writeFileSync } from 'node:fs';
import { cpus, totalmem, platform, release, arch, loadavg } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';

export interface BenchContext {
  quick: boolean;
  log(line: string): void;
  /** Plant-history size BATCHESxSPECTRAxPOINTS (bench/sections/plant-history.ts). */
  historySize?: string;
}
export type Figures = Record<string, number | string | null>;
interface Section {
  name: string;
  run(ctx: BenchContext): Promise<Figures>;
}

function parseArgs(argv: string[]): { json: string | null; quick: boolean; only: string[]; historySize?: string } {
  let json: string | null = null;
  let historySize: string | undefined;
  let quick = false;
  const only: string[] = [];
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i]!;
    if (a === '--json') {
      json = argv[++i] ?? null;
      if (!json) throw new Error('--json needs a file name');
    } else if (a === '--quick') quick = true;
    else if (a === '--only') {
      const v = argv[++i];
      if (!v) throw new Error('--only needs a section name');
      only.push(v);
    } else if (a === '--history-size') {
      historySize = argv[++i];
      if (!historySize) throw new Error('--history-size needs BATCHESxSPECTRAxPOINTS, e.g. 500x500x1024');
    } else throw new Error(`unknown argument '${a}' (use --json FILE, --quick, --only NAME, --history-size BxSxP)`);
  }
  return { json, quick, only, ...(historySize ? { historySize } : {}) };
}

function python(code: string): string | null {
  try {
    return execFileSync('python3', ['-c', code], { encoding: 'utf8', stdio: ['ignore', 'pipe', 'ignore'] }).trim();
  } catch {
    return null;
  }
}

function machine(): Record<string, string | number> {
  const c = cpus();
  const py = python(
    [
      'import json, numpy, scipy',
      'cfg = numpy.show_config(mode="dicts")',
      'blas = cfg.get("Build Dependencies", {}).get("blas", {})',
      'print(json.dumps({"numpy": numpy.__version__, "scipy": scipy.__version__, "blas": str(blas.get("name")) + " " + str(blas.get("version")), "blas_config": str(blas.get("openblas configuration", ""))}))',
    ].join('\n'),
  );
  const info = py ? (JSON.parse(py) as Record<string, string>) : { numpy: 'absent', scipy: 'absent', blas: 'absent', blas_config: '' };
  return {
    cpu: c[0]?.model ?? 'unknown',
    cores: c.length,
    memory_gib: Math.round((totalmem() / 2 ** 30) * 10) / 10,
    os: `${platform()} ${release()} ${arch()}`,
    node: process.version,
    load_average_1_5_15min: loadavg().map((v) => v.toFixed(2)).join(' '),
    numpy: info.numpy!,
    scipy: info.scipy!,
    numpy_blas: info.blas!,
    numpy_blas_config: info.blas_config!,
    OPENBLAS_CORETYPE: process.env.OPENBLAS_CORETYPE ?? '(unset)',
    OPENBLAS_NUM_THREADS: process.env.OPENBLAS_NUM_THREADS ?? '(unset)',
  };
}

async function main(): Promise<void> {
  const args = parseArgs(process.argv.slice(2));
  const here = dirname(fileURLToPath(import.meta.url));
  const dir = join(here, 'sections');
  const files = readdirSync(dir).filter((f) => f.endsWith('.ts')).sort();
  const m = machine();
  console.log('Tideline benchmarks');
  for (const [k, v] of Object.entries(m)) console.log(`  ${k}: ${v}`);
  console.log(`  started: ${new Date().toISOString()}${args.quick ? ' (quick)' : ''}`);
  const results: Record<string, Figures> = {};
  let failures = 0;
  for (const f of files) {
    const mod = (await import(pathToFileURL(join(dir, f)).href)) as Partial<Section>;
    if (typeof mod.run !== 'function') {
      console.log(`\n[${f}] skipped: does not export run()`);
      continue;
    }
    const sectionName = typeof mod.name === 'string' ? mod.name : f.replace(/\.ts$/, '');
    if (args.only.length && !args.only.includes(sectionName) && !args.only.includes(f.replace(/\.ts$/, ''))) continue;
    console.log(`\n[${sectionName}]`);
    const t0 = performance.now();
    try {
      const figures = await mod.run!({ quick: args.quick, log: (line) => console.log(`  ${line}`), ...(args.historySize ? { historySize: args.historySize } : {}) });
      results[sectionName] = figures;
      for (const [k, v] of Object.entries(figures)) console.log(`  ${k} = ${typeof v === 'number' ? formatNumber(v) : String(v)}`);
    } catch (err) {
      failures++;
      const msg = err instanceof Error ? err.message : String(err);
      results[sectionName] = { error: msg };
      console.log(`  error: ${msg}`);
    }
    console.log(`  (${((performance.now() - t0) / 1000).toFixed(1)} s)`);
  }
  if (args.json) {
    const flat: Record<string, number | string | null> = {};
    for (const figures of Object.values(results)) Object.assign(flat, figures);
    writeFileSync(args.json, JSON.stringify({ machine: m, quick: args.quick, figures: flat, sections: results }, null, 2) + '\n');
    console.log(`\nfigures written to ${args.json}`);
  }
  if (failures) process.exitCode = 1;
}

function formatNumber(v: number): string {
  if (!Number.isFinite(v)) return String(v);
  const a = Math.abs(v);
  if (a !== 0 && (a < 1e-3 || a >= 1e7)) return v.toExponential(3);
  return a >= 100 ? v.toFixed(0) : v.toPrecision(4);
}

const isEntry = process.argv[1] !== undefined && resolve(process.argv[1]) === fileURLToPath(import.meta.url);
if (isEntry) {
  main().catch((err) => {
    console.error(err instanceof Error ? err.message : err);
    process.exit(1);
  });
}
