/**
 * `npm run tideline -- serve` on a fresh checkout: no built dashboard anywhere, and the served page
 * is the dashboard, built on first serve (server/web-dashboard.ts). Rebuilt when a source it was
 * built from changed; a folder Tideline did not build is served as it is and never written.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { BUILD_INPUTS, dashboardState, ensureDashboard } from '../../server/web-dashboard.ts';

const ROOT = resolve(import.meta.dirname, '../..');
const tmp = mkdtempSync(join(tmpdir(), 'tideline-serve-'));
const running: ChildProcess[] = [];

afterAll(async () => {
  // a child ended by a signal has exitCode null and signalCode set: only one with neither still runs
  for (const p of running) if (p.exitCode === null && p.signalCode === null) await stop(p);
  rmSync(tmp, { recursive: true, force: true });
});

/** Start `tideline serve` as a user would (the CLI through tsx), return its URL and what it printed. */
async function serve(webDir: string, dataDir: string): Promise<{ url: string; out: string; proc: ChildProcess }> {
  const proc = spawn(process.execPath, ['--import', 'tsx', 'server/cli.ts', 'serve', '--port', '0', '--data-dir', dataDir, '--web-dir', webDir], {
    cwd: ROOT,
    stdio: ['ignore', 'pipe', 'pipe'],
    env: { ...process.env, TIDELINE_LOG_LEVEL: 'warn' },
  });
  running.push(proc);
  let out = '';
  const url = await new Promise<string>((ok, fail) => {
    const on = (d: Buffer) => {
      out += d.toString();
      const m = /Tideline is running at (http:\/\/\S+?)\/\s/.exec(out);
      if (m) ok(m[1]!);
    };
    proc.stdout!.on('data', on);
    proc.stderr!.on('data', on);
    proc.once('exit', (c) => fail(new Error(`serve exited with ${c}:\n${out}`)));
  });
  return { url, out, proc };
}

async function stop(p: ChildProcess): Promise<void> {
  if (p.exitCode !== null || p.signalCode !== null) return;
  const exited = new Promise((r) => p.once('exit', r));
  p.kill('SIGTERM');
  // a serve that does not end within 20 s of SIGTERM is killed, so the suite never hangs on it
  const t = setTimeout(() => p.kill('SIGKILL'), 20_000);
  await exited;
  clearTimeout(t);
}

describe('the served dashboard after npm install', () => {
  it('builds the dashboard on first serve when there is none, and serves it', async () => {
    const web = join(tmp, 'dist');
    expect(existsSync(web)).toBe(false);
    const s = await serve(web, join(tmp, 'data'));
    expect(s.out).toMatch(/building the dashboard into .* \(first serve\)/);
    const page = await fetch(`${s.url}/`);
    expect(page.status).toBe(200);
    const html = await page.text();
    expect(html).toContain('<div id="app"></div>');
    expect(html).not.toMatch(/not built/);
    const script = /src="\.?\/?(assets\/index-[^"]+\.js)"/.exec(html)![1]!;
    const js = await fetch(`${s.url}/${script}`);
    expect(js.status).toBe(200);
    expect(js.headers.get('content-type')).toMatch(/javascript/);
    expect(dashboardState(web)).toEqual({ state: 'current' });
    await stop(s.proc);

    // a second serve finds it current and does not build
    const again = await serve(web, join(tmp, 'data'));
    expect(again.out).toMatch(/up to date/);
    expect(again.out).not.toMatch(/building the dashboard/);
    await stop(again.proc);
  }, 300_000);

  it('finds a build stale when a source it was made from changed, and rebuilds it', async () => {
    const web = join(tmp, 'dist');
    const stamp = JSON.parse(readFileSync(join(web, BUILD_INPUTS), 'utf8'));
    const some = Object.keys(stamp.files).find((f) => f.startsWith('web/src/'))!;
    stamp.files[some] = '0'.repeat(64); // as if the file had changed since the build
    writeFileSync(join(web, BUILD_INPUTS), JSON.stringify(stamp));
    expect(dashboardState(web)).toEqual({ state: 'stale', changed: some });
    const lines: string[] = [];
    const r = await ensureDashboard(web, (l) => lines.push(l));
    expect(r.built).toBe(true);
    expect(lines.join('\n')).toContain(`rebuilding the dashboard in ${web} (${some} changed)`);
    expect(dashboardState(web)).toEqual({ state: 'current' });
  }, 300_000);

  it("never writes into a folder it did not build", async () => {
    const site = join(tmp, 'site-dashboard');
    mkdirSync(site);
    writeFileSync(join(site, 'index.html'), '<!doctype html><title>site</title>');
    expect(dashboardState(site)).toEqual({ state: 'foreign' });
    const r = await ensureDashboard(site, () => undefined);
    expect(r).toMatchObject({ built: false });
    expect(readFileSync(join(site, 'index.html'), 'utf8')).toBe('<!doctype html><title>site</title>');
    const other = join(tmp, 'other-files');
    mkdirSync(other);
    writeFileSync(join(other, 'notes.txt'), 'keep me');
    expect(await ensureDashboard(other, () => undefined)).toMatchObject({ built: false, note: expect.stringMatching(/holds other files/) });
    expect(readFileSync(join(other, 'notes.txt'), 'utf8')).toBe('keep me');
  }, 60_000);
});
