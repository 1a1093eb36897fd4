/**
 * The dashboard served by `npm run tideline -- serve`: built on first serve, and again whenever its
 * sources changed, so a fresh clone works after a plain `npm install`.
 *
 * The Vite build (web/vite.config.ts) writes build-inputs.json beside the built files: every project
 * file the bundle was made from, with its SHA-256. Before the server starts, the configured web
 * folder is checked against the sources in this checkout:
 * - missing (no index.html): built;
 * - stale (a listed file changed or is gone): built again;
 * - current: served as it is;
 * - built elsewhere (index.html but no build-inputs.json: a folder the site supplies): served as it
 *   is, never touched — Tideline only writes into a folder that is empty or that it built itself.
 * The build runs Vite in a child process (a development dependency: an install without it keeps
 * the server's "not built" page, which says what to run).
 */
import { spawn } from 'node:child_process';
import { createHash } from 'node:crypto';
import { existsSync, readFileSync, readdirSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

const REPO = resolve(dirname(fileURLToPath(import.meta.url)), '..');
export const BUILD_INPUTS = 'build-inputs.json';

export type DashboardState =
  | { state: 'missing' }
  | { state: 'stale'; changed: string }
  | { state: 'current' }
  | { state: 'foreign' }
  | { state: 'no-sources' };

/** Whether the built dashboard in `webDir` is there and was built from the sources of this checkout. */
export function dashboardState(webDir: string, repo = REPO): DashboardState {
  if (!existsSync(join(repo, 'web', 'vite.config.ts'))) return { state: 'no-sources' };
  if (!existsSync(join(webDir, 'index.html'))) return { state: 'missing' };
  const stampFile = join(webDir, BUILD_INPUTS);
  if (!existsSync(stampFile)) return { state: 'foreign' };
  let files: Record<string, string>;
  try {
    files = (JSON.parse(readFileSync(stampFile, 'utf8')) as { files: Record<string, string> }).files;
    if (!files || typeof files !== 'object') throw new Error('no files');
  } catch {
    return { state: 'stale', changed: BUILD_INPUTS };
  }
  for (const [rel, hash] of Object.entries(files)) {
    const f = join(repo, rel);
    if (!existsSync(f)) return { state: 'stale', changed: rel };
    if (createHash('sha256').update(readFileSync(f)).digest('hex') !== hash) return { state: 'stale', changed: rel };
  }
  return { state: 'current' };
}

function viteBin(repo: string): string | null {
  try {
    const req = createRequire(join(repo, 'package.json'));
    const pkg = req.resolve('vite/package.json');
    const bin = join(dirname(pkg), 'bin', 'vite.js');
    return existsSync(bin) ? bin : null;
  } catch {
    return null;
  }
}

/**
 * Build the dashboard into `webDir` when it is missing or stale and the folder is Tideline's to
 * write (absent, empty, or built by Tideline). Returns what happened, in words for the console.
 */
export async function ensureDashboard(webDir: string, say: (line: string) => void, repo = REPO): Promise<{ built: boolean; note: string }> {
  const dir = resolve(webDir);
  const st = dashboardState(dir, repo);
  if (st.state === 'current') return { built: false, note: `dashboard in ${dir} is up to date` };
  if (st.state === 'foreign') return { built: false, note: `serving the dashboard in ${dir} as it is (not built by Tideline)` };
  if (st.state === 'no-sources') return { built: false, note: `no dashboard sources next to the server (looked for ${join(repo, 'web')})` };
  if (st.state === 'missing' && existsSync(dir) && readdirSync(dir).length > 0 && !existsSync(join(dir, BUILD_INPUTS))) {
    return { built: false, note: `not building the dashboard into ${dir}: the folder holds other files` };
  }
  const bin = viteBin(repo);
  if (!bin) return { built: false, note: 'the dashboard is not built and Vite (a development dependency) is not installed: run npm install, then npm run build:web' };
  say(st.state === 'missing' ? `building the dashboard into ${dir} (first serve) …` : `rebuilding the dashboard in ${dir} (${st.changed} changed) …`);
  const out: string[] = [];
  const code = await new Promise<number>((res) => {
    const p = spawn(process.execPath, [bin, 'build', '--config', join(repo, 'web', 'vite.config.ts'), '--outDir', dir, '--emptyOutDir', '--logLevel', 'warn'], { cwd: repo, stdio: ['ignore', 'pipe', 'pipe'] });
    p.stdout.on('data', (d: Buffer) => out.push(d.toString()));
    p.stderr.on('data', (d: Buffer) => out.push(d.toString()));
    p.on('error', (e) => (out.push(String(e)), res(-1)));
    p.on('close', (c) => res(c ?? -1));
  });
  if (code !== 0) return { built: false, note: `building the dashboard failed (exit ${code}): ${out.join('').trim().slice(-2000)}` };
  return { built: true, note: `dashboard built into ${dir}` };
}
