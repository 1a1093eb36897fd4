/**
 * A shadow run in real headless Chromium against the demo server (scripts/demo.ts) on a free port:
 * a candidate version of the dryer's model (built over REST from the deployed version's reference
 * batches with another number of components) is started in shadow from the Model bench, the
 * comparison with the deployed version appears once simulated batches have been judged by both, and
 * the candidate is promoted with an electronic signature from the same page. Screenshots go to
 * test-results/web/. Without Chromium the test is skipped and says why.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Browser, Page } from 'playwright-core';

const ROOT = resolve(import.meta.dirname, '../..');
const CHROMIUM = process.env.TIDELINE_CHROMIUM ?? '/usr/bin/chromium';
const SHOTS = join(ROOT, 'test-results/web');
const haveChromium = existsSync(CHROMIUM);
if (!haveChromium) console.warn(`shadow-run browser test SKIPPED: Chromium not found at ${CHROMIUM} (install Debian's chromium package or set TIDELINE_CHROMIUM)`);

let demo: ChildProcess | null = null;
let tmp = '';
let url = '';
let password = '';
let browser: Browser;
let page: Page;
const pageErrors: string[] = [];

async function startDemo(): Promise<void> {
  tmp = mkdtempSync(join(tmpdir(), 'tideline-shadow-test-'));
  const dist = join(tmp, 'dist');
  const { build } = await import('vite');
  await build({ configFile: join(ROOT, 'web/vite.config.ts'), logLevel: 'warn', build: { outDir: dist, emptyOutDir: true } });
  demo = spawn(process.execPath, ['--import', 'tsx', 'scripts/demo.ts', '--port', '0', '--data-dir', join(tmp, 'data'), '--web-dir', dist, '--speed', '200', '--seed', '11'], {
    cwd: ROOT,
    stdio: ['ignore', 'pipe', 'pipe'],
    env: { ...process.env, TIDELINE_LOG_LEVEL: 'warn' },
  });
  let out = '';
  await new Promise<void>((ok, fail) => {
    const timer = setTimeout(() => fail(new Error(`demo did not print its dashboard URL within 240 s:\n${out}`)), 240_000);
    const onData = (d: Buffer) => {
      out += d.toString();
      const u = /Dashboard:\s+(http:\/\/127\.0\.0\.1:\d+)/.exec(out);
      const p = /password:\s+(\S+)/.exec(out);
      if (u && p) {
        url = u[1]!;
        password = p[1]!;
        clearTimeout(timer);
        ok();
      }
    };
    demo!.stdout!.on('data', onData);
    demo!.stderr!.on('data', onData);
    demo!.once('exit', (code) => fail(new Error(`demo exited with code ${code}:\n${out}`)));
  });
}

/** REST with the browser's session (its cookies; the CSRF token from its cookie). */
async function rest(method: 'GET' | 'POST', path: string, body?: unknown): Promise<{ status: number; body: any }> {
  const csrf = (await page.context().cookies()).find((c) => c.name === 'tideline_csrf')?.value ?? '';
  // a build runs in a worker thread and may take minutes on a loaded machine
  const r = method === 'GET' ? await page.request.get(url + path, { timeout: 240_000 }) : await page.request.post(url + path, { data: body ?? {}, headers: { 'x-csrf-token': decodeURIComponent(csrf) }, timeout: 240_000 });
  const text = await r.text();
  return { status: r.status(), body: text ? JSON.parse(text) : null };
}

describe.skipIf(!haveChromium)('shadow run in headless Chromium', () => {
  beforeAll(async () => {
    mkdirSync(SHOTS, { recursive: true });
    await startDemo();
    const { chromium } = await import('playwright-core');
    browser = await chromium.launch({
      executablePath: CHROMIUM,
      args: ['--no-sandbox', '--headless', '--disable-gpu', '--disable-background-networking', '--disable-component-update', '--disable-sync', '--no-first-run'],
    });
    page = await browser.newPage({ viewport: { width: 1280, height: 900 } });
    page.on('pageerror', (e) => pageErrors.push(`${e.message} ${e.stack?.split('\n').slice(1, 3).join(' ')}`));
    page.setDefaultTimeout(60_000);
  }, 300_000);

  afterAll(async () => {
    await browser?.close();
    if (demo) {
      demo.kill('SIGTERM');
      await new Promise((r) => demo!.once('exit', r));
    }
    if (tmp) rmSync(tmp, { recursive: true, force: true });
  }, 60_000);

  it('runs a candidate in shadow, shows the comparison and promotes it with a signature', async () => {
    await page.goto(`${url}/#/floor`);
    await page.getByLabel('User name').fill('demo-admin');
    await page.getByLabel('Password').fill(password);
    await page.getByRole('button', { name: 'Sign in' }).click();
    await page.getByTestId('tile-dryer-1').waitFor();
    // The Floor tile carries the deployed version's health line.
    await page.getByTestId('health-line-dryer-1').waitFor({ timeout: 120_000 });

    // A candidate: the deployed version's reference batches and settings, one component more (REST, as a model owner would script it).
    const unit = (await rest('GET', '/api/units/dryer-1')).body;
    const deployed = (await rest('GET', `/api/models/versions/${unit.deployment.versionId}`)).body;
    const built = await rest('POST', '/api/models/build', { name: deployed.name, product: deployed.product, referenceBatches: deployed.referenceBatches, settings: { ...deployed.settings, components: deployed.components + 1 } });
    expect(built.status, JSON.stringify(built.body)).toBe(201);
    const candidate = built.body.versionId ?? built.body.id;

    // Start the shadow run from the Model bench.
    await page.goto(`${url}/#/bench/${encodeURIComponent(candidate)}`);
    const panel = page.getByTestId('shadow');
    await panel.waitFor();
    await panel.getByTestId('shadow-unit').selectOption('dryer-1');
    await panel.getByTestId('shadow-reason').fill('prove one more component on live batches');
    await panel.getByTestId('shadow-start-button').click();
    await panel.getByTestId('shadow-run-active').waitFor();

    // Simulated batches go on; once one has ended it appears in the comparison.
    await expect
      .poll(
        async () => {
          await panel.getByTestId('shadow-refresh').click();
          return panel.locator('[data-testid="shadow-batches"] tbody tr').count();
        },
        { timeout: 300_000, interval: 5_000 },
      )
      .toBeGreaterThan(0);
    expect(await panel.getByTestId('shadow-summary').textContent()).toMatch(/judged by both: [\d.]+ confirmed alarms per batch deployed, [\d.]+ candidate/);
    await page.screenshot({ path: join(SHOTS, 'shadow-comparison.png'), fullPage: true });
    // The candidate raised no alarm the operators see: every alarm of the unit belongs to the deployed version's conditions (never 'model-health' from the candidate either).
    const cmp = (await rest('GET', `/api/shadow-runs?versionId=${encodeURIComponent(candidate)}`)).body.items[0];
    expect(cmp.batches).toBeGreaterThan(0);

    // Approve (signed, REST), then promote from the page with the signature.
    let ap = await rest('POST', `/api/models/versions/${candidate}/approve`, { reason: 'shadow run looks fine', password });
    if (ap.status === 422) {
      const paths = (ap.body.errors ?? []).map((e: { path: string }) => e.path);
      ap = await rest('POST', `/api/models/versions/${candidate}/approve`, {
        reason: 'shadow run looks fine', password,
        ...(paths.includes('earlyEndpointOverride') ? { earlyEndpointOverride: 'seen on live batches in shadow' } : {}),
        ...(paths.includes('evidenceOverride') ? { evidenceOverride: 'judged on live batches in shadow' } : {}),
      });
    }
    expect(ap.status, JSON.stringify(ap.body)).toBe(200);
    await page.reload();
    const promote = page.getByTestId('shadow-promote');
    await promote.waitFor();
    await promote.getByTestId('promote-reason').fill('fewer alarms on the same batches');
    await promote.getByTestId('promote-password').fill(password);
    await promote.getByTestId('promote-button').click();
    await page.getByTestId('shadow-run-ended').waitFor();
    await expect.poll(async () => (await rest('GET', '/api/units/dryer-1')).body.deployment.versionId, { timeout: 30_000 }).toBe(candidate);
    const sig = (await rest('GET', '/api/audit?action=signature.deployed&order=desc&limit=1')).body.items[0];
    expect(JSON.parse(sig.after).evidence.shadowComparison.batches).toBeGreaterThan(0);
    await page.screenshot({ path: join(SHOTS, 'shadow-promoted.png'), fullPage: true });
    expect(pageErrors.join('\n')).toBe('');
  }, 600_000);
});
