/**
 * Live chart frame rate of the Watch view: the Watch chart components (two score charts
 * on the golden envelope, T², Q, score plane) hold 10,000 points per series while new results
 * arrive every frame through the live reducer; frames per second are counted with
 * requestAnimationFrame in headless Chromium. Goal ≥ 30.
 *
 * Builds web/ (vite) into a temporary folder, serves it on 127.0.0.1 port 0, opens bench.html.
 * Returns { watch_fps } (null with watch_fps_skipped when Chromium is absent).
 * Run alone: `npx tsx bench/sections/watch-fps.ts`.
 */
import { createServer, type Server } from 'node:http';
import { existsSync, mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { extname, join, normalize, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import type { AddressInfo } from 'node:net';

const ROOT = resolve(fileURLToPath(new URL('../..', import.meta.url)));
export const CHROMIUM = process.env.TIDELINE_CHROMIUM ?? '/usr/bin/chromium';
export const CHROMIUM_ARGS = ['--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-component-update', '--no-first-run'];

const TYPES: Record<string, string> = { '.html': 'text/html', '.js': 'text/javascript', '.css': 'text/css', '.svg': 'image/svg+xml' };

function serve(dir: string): Promise<Server> {
  const server = createServer((req, res) => {
    const path = normalize(decodeURIComponent((req.url ?? '/').split('?')[0]!)).replace(/^(\.\.[/\\])+/, '');
    const file = join(dir, path === '/' ? 'index.html' : path);
    if (!file.startsWith(dir) || !existsSync(file)) {
      res.writeHead(404).end('not found');
      return;
    }
    res.writeHead(200, { 'content-type': TYPES[extname(file)] ?? 'application/octet-stream' });
    res.end(readFileSync(file));
  });
  return new Promise((ok) => server.listen(0, '127.0.0.1', () => ok(server)));
}

export const name = 'watch-fps';

/** Figures as bench/run.ts collects them. */
export type WatchFpsFigures = Record<string, number | string | null>;

export interface WatchFpsOptions {
  /** bench/run.ts: smaller run. */
  quick?: boolean;
  log?(line: string): void;
  points?: number;
  perFrame?: number;
  seconds?: number;
  /** Which charts (score,stat,plane); all by default. */
  charts?: string;
}

export async function run(opts: WatchFpsOptions = {}): Promise<WatchFpsFigures> {
  const points = opts.points ?? 10_000;
  const perFrame = opts.perFrame ?? 5;
  const seconds = opts.seconds ?? (opts.quick ? 2 : 5);
  const base = { watch_fps_points: points, watch_fps_new_per_frame: perFrame };
  if (!existsSync(CHROMIUM)) return { watch_fps: null, watch_fps_seconds: null, ...base, watch_fps_skipped: `Chromium not found at ${CHROMIUM}` };
  const out = mkdtempSync(join(tmpdir(), 'tideline-web-'));
  const { build } = await import('vite');
  await build({ configFile: join(ROOT, 'web/vite.config.ts'), logLevel: 'warn', build: { outDir: out, emptyOutDir: true } });
  const server = await serve(out);
  const { chromium } = await import('playwright-core');
  const browser = await chromium.launch({ executablePath: CHROMIUM, args: CHROMIUM_ARGS });
  try {
    const page = await browser.newPage({ viewport: { width: 1280, height: 800 } });
    const errors: string[] = [];
    page.on('pageerror', (e) => errors.push(e.message));
    const port = (server.address() as AddressInfo).port;
    await page.goto(`http://127.0.0.1:${port}/bench.html?points=${points}&perFrame=${perFrame}&seconds=${seconds}${opts.charts ? `&charts=${opts.charts}` : ''}`);
    const r = await page.waitForFunction(() => window.__tidelineFps, undefined, { timeout: (seconds + 30) * 1000 }).then((h) => h.jsonValue());
    if (errors.length) throw new Error(`bench page failed: ${errors.join('; ')}`);
    if (!r || r.rowsAtEnd !== points) throw new Error(`bench page kept ${r?.rowsAtEnd} rows, expected ${points}`);
    opts.log?.(`watch_fps: ${r.frames} frames in ${r.seconds.toFixed(2)} s with ${points} points per series, ${perFrame} new results per frame`);
    return { watch_fps: Math.round(r.fps * 10) / 10, watch_fps_seconds: Math.round(r.seconds * 100) / 100, ...base };
  } finally {
    await browser.close();
    server.close();
    rmSync(out, { recursive: true, force: true });
  }
}

declare global {
  interface Window {
    __tidelineFps?: { fps: number; frames: number; seconds: number; points: number; perFrame: number; rowsAtEnd: number };
  }
}

if (process.argv[1] && resolve(process.argv[1]) === fileURLToPath(import.meta.url)) {
  run().then(
    (r) => console.log(JSON.stringify(r, null, 2)),
    (e) => {
      console.error(e);
      process.exitCode = 1;
    },
  );
}
