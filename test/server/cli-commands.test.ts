/**
 * The command line as an administrator meets it: every command's bad arguments end in a sentence
 * and exit code 2, --help answers with exit code 0, what the CLI creates is audited as its REST
 * equivalent is, a unit created beside a running server is known to it, and `config` hides secrets.
 * All through the CLI as a child process and the REST API of a running server.
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { login, startTestServer, type TestServer } from './helpers.ts';

const cli = (args: string[], env: NodeJS.ProcessEnv = {}) =>
  spawnSync(process.execPath, ['--import', 'tsx', 'server/cli.ts', ...args], { encoding: 'utf8', env: { ...process.env, TIDELINE_LOG_LEVEL: 'warn', ...env } });

function auditRows(dir: string): { user: string; action: string; object: string; after: string | null }[] {
  const db = new Database(join(dir, 'tideline.db'), { readonly: true });
  try {
    return db.prepare('SELECT user, action, object, after FROM audit_trail ORDER BY seq').all() as never;
  } finally {
    db.close();
  }
}

describe('tideline command line: arguments', () => {
  it('answers --help for the whole CLI and for each command with exit code 0, and no command with the usage and exit code 2', () => {
    let r = cli(['--help']);
    expect(r.status).toBe(0);
    expect(r.stdout).toMatch(/exit codes: 0 done, 1 a check failed/);
    for (const cmd of ['serve', 'unit', 'analyzer', 'import', 'export', 'migrate', 'config']) {
      r = cli([cmd, '--help']);
      expect(r.status, cmd).toBe(0);
      expect(r.stdout, cmd).toMatch(new RegExp(`usage: npm run tideline -- ${cmd}`));
    }
    r = cli([]);
    expect(r.status).toBe(2);
    expect(r.stderr).toMatch(/usage: npm run tideline/);
  }, 240_000);

  it('refuses bad arguments with a sentence naming the problem and exit code 2, writing nothing', () => {
    const d = mkdtempSync(join(tmpdir(), 'tideline-cli-args-'));
    const data = ['--data-dir', d];
    const cases: [string[], RegExp][] = [
      [['bogus'], /unknown command "bogus"/],
      [['unit', 'add', ...data], /unit add: the unit id is missing/],
      [['unit', 'remove', 'u1', ...data], /unit: unknown sub-command "remove"/],
      [['unit', 'add', 'u1', 'Dryer', 'one', ...data], /unexpected argument "Dryer"/],
      [['unit', 'add', 'u 1', ...data], /the unit id "u 1" holds " "|the unit id "u 1" holds U\+0020/],
      [['unit', 'add', 'u1', '--kind', 'oven', ...data], /--kind must be dryer, reactor or other, got "oven"/],
      [['unit', 'add', 'u1', '--nmae', 'x', ...data], /unit: unknown flag --nmae/],
      [['unit', 'add', 'u1', '--name', ...data], /flag --name needs a value/],
      [['unit', 'add', 'u1', '--name', 'a', '--name', 'b', ...data], /flag --name is given twice/],
      [['unit', 'add', 'u1', '--name', 'Dryer\u001b[2J', ...data], /--name holds an escape character \(U\+001B\)/],
      [['unit', 'add', 'u1', '--name', 'Dryer \u202eevil', ...data], /--name holds a bidirectional control character \(U\+202E\)/],
      [['unit', 'add', 'u1', '--name', 'x'.repeat(201), ...data], /--name is 201 characters long; at most 200/],
      [['analyzer', 'add', '-nir', ...data], /unknown option "-nir"/],
      [['analyzer', 'add', '.nir', ...data], /the analyzer id ".nir" must start with a letter or digit/],
      [['export', ...data], /export: the batch id is missing/],
      [['export', 'B-1', 'B-2', ...data], /unexpected argument "B-2"/],
      [['export', 'B-1', '--format', 'xml', ...data], /--format must be csv or jcamp/],
      [['import', '--unit', 'u1', ...data], /import: missing --product, a FILE or DIR/],
      [['import', '--unit', 'u1', '--product', 'P', '--delimiter', '|', 'x.csv', ...data], /--delimiter must be , ; or tab/],
      [['migrate', 'now', ...data], /migrate: unexpected argument "now"/],
      [['serve', '--port', 'eighty', ...data], /--port: port must be a number, got "eighty"/],
      [['serve', '--portt', '1', ...data], /serve: unknown flag --portt/],
      [['config', '--metrics.access', 'token', ...data], /metrics: access 'token' needs metrics.token/],
      [['config', '--metrics.access', 'token', '--metrics.token', 'short', ...data], /metrics.token: must be at least 32 characters/],
    ];
    for (const [args, msg] of cases) {
      const r = cli(args);
      expect(r.status, args.join(' ')).toBe(2);
      expect(r.stderr, args.join(' ')).toMatch(msg);
      expect(r.stderr, args.join(' ')).not.toMatch(/\n\s+at /); // a sentence, not a stack trace
    }
    // Nothing was created by any of them.
    expect(cli(['unit', 'add', 'u1', ...data]).status).toBe(0);
  }, 600_000);
});

describe('tideline command line: what it creates is audited', () => {
  it('unit add, analyzer add and import write the same audit records as their REST equivalents', () => {
    const d = mkdtempSync(join(tmpdir(), 'tideline-cli-audit-'));
    const data = ['--data-dir', d];
    expect(cli(['unit', 'add', 'dryer-7', '--kind', 'dryer', '--name', 'Fluid-bed dryer 7', ...data]).status).toBe(0);
    const a = cli(['analyzer', 'add', 'nir-7', '--name', 'NIR probe 7', ...data]);
    expect(a.status).toBe(0);
    const token = a.stdout.trim().split('\n').pop()!;
    writeFileSync(join(d, 'h.csv'), 'batch,time_ms,1000,1010\nH-7,1767225600000,1,2\nH-7,1767225610000,1.5,2.5\n');
    expect(cli(['import', '--unit', 'dryer-7', '--product', 'granule', ...data, join(d, 'h.csv')]).status).toBe(0);
    const rows = auditRows(d);
    const by = rows.map((r) => `${r.action} ${r.object}`);
    expect(by).toEqual(expect.arrayContaining(['unit.create unit:dryer-7', 'analyzer.create analyzer:nir-7', 'batch.import unit:dryer-7']));
    for (const r of rows) expect(r.user).toMatch(/^cli:/);
    const imp = JSON.parse(rows.find((r) => r.action === 'batch.import')!.after!);
    expect(imp).toMatchObject({ batches: ['H-7'], files: ['h.csv'], product: 'granule' });
    // The token is in no audit record.
    expect(JSON.stringify(rows)).not.toContain(token);
    // The chain the CLI extended verifies.
    const v = cli(['audit', 'verify', ...data]);
    expect(v.stdout).toMatch(/audit trail intact: 3 records/);
    expect(v.status).toBe(0);
  }, 240_000);
});

describe('tideline command line: audit verify on an empty trail', () => {
  it('says there is nothing to verify (0 records), not that the trail is intact', () => {
    const d = mkdtempSync(join(tmpdir(), 'tideline-cli-empty-audit-'));
    const r = cli(['audit', 'verify', '--data-dir', d]);
    expect(r.status).toBe(0);
    expect(r.stdout).toMatch(/^audit trail empty: nothing to verify: the audit trail holds 0 records, so no chain was checked; this is no evidence of an intact trail\n$/);
    expect(r.stdout).not.toMatch(/intact:/);
  }, 120_000);
});

describe('tideline command line beside a running server', () => {
  let ts: TestServer;
  beforeAll(async () => {
    ts = await startTestServer({}, { dir: mkdtempSync(join(tmpdir(), 'tideline-cli-live-')) });
  }, 60_000);
  afterAll(async () => {
    await ts?.stop();
  });

  it('a unit added by the CLI is known to the server without a restart; creating it again over REST is a 409, not a 500', async () => {
    const admin = await login(ts, 'administrator');
    expect(cli(['unit', 'add', 'reactor-3', '--kind', 'reactor', '--data-dir', ts.dir]).status).toBe(0);
    let r = await admin.post('/api/units', { id: 'reactor-3', kind: 'reactor' });
    expect(r.status).toBe(409);
    expect(r.body.detail).toMatch(/unit "reactor-3" already exists/);
    r = await admin.get('/api/units/reactor-3');
    expect(r.status).toBe(200);
    expect(r.body).toMatchObject({ id: 'reactor-3' });
  }, 120_000);

  it('names with control, escape or bidirectional characters or a lone surrogate are refused over REST, naming the field', async () => {
    const admin = await login(ts, 'administrator');
    const bad: [string, RegExp][] = [
      ['Dryer\u0000', /NUL character \(U\+0000\)/],
      ['Dryer\u001b[31m', /escape character \(U\+001B\)/],
      ['Dryer\u2067x', /bidirectional control character \(U\+2067\)/],
      ['Dryer\ud800', /lone surrogate \(U\+D800\)/],
      ['Dryer\nTwo', /line break/],
      ['   ', /must not be empty or only spaces/],
    ];
    for (const [name, msg] of bad) {
      // Written by hand so that the lone surrogate reaches the server as the JSON escape \ud800.
      const body = `{"id":"u-bad","name":${JSON.stringify(name).replace(/[\ud800-\udfff]/g, (c) => '\\u' + c.charCodeAt(0).toString(16))}}`;
      const r = await admin.post('/api/units', body);
      expect(r.status, JSON.stringify(name)).toBe(400);
      expect(JSON.stringify(r.body), JSON.stringify(name)).toMatch(msg);
      expect(JSON.stringify(r.body)).toMatch(/name/);
    }
    expect((await admin.get('/api/units/u-bad')).status).toBe(404);
    const ok = await admin.post('/api/units', { id: 'u-good', name: 'Réacteur 2 — “Nord” 反応器' });
    expect(ok.status).toBe(201);
    expect(ok.body.name).toBe('Réacteur 2 — “Nord” 反応器');
  }, 60_000);
});

describe('/metrics as metrics.access says', () => {
  it('is off by default, asks for the token when set to token, and never accepts a wrong one', async () => {
    const off = await startTestServer();
    try {
      const r = await fetch(off.server.url + '/metrics');
      expect(r.status).toBe(404);
      expect(await r.text()).toMatch(/metrics are off/);
    } finally {
      await off.stop();
    }
    const token = 'm'.repeat(16) + 'e'.repeat(16) + 't';
    const on = await startTestServer({ metrics: { access: 'token', token } });
    try {
      let r = await fetch(on.server.url + '/metrics');
      expect(r.status).toBe(401);
      expect(r.headers.get('www-authenticate')).toMatch(/Bearer/);
      r = await fetch(on.server.url + '/metrics', { headers: { authorization: `Bearer ${token}x` } });
      expect(r.status).toBe(401);
      r = await fetch(on.server.url + '/metrics', { headers: { authorization: `Bearer ${token}` } });
      expect(r.status).toBe(200);
      expect(await r.text()).toMatch(/tideline_ingest_spectra_total \d+/);
      // the scheme name is case-insensitive (RFC 9110 §11.1): Prometheus and curl users write either
      r = await fetch(on.server.url + '/metrics', { headers: { authorization: `bearer ${token}` } });
      expect(r.status).toBe(200);
    } finally {
      await on.stop();
    }
  }, 60_000);
});

describe('tideline config', () => {
  it('prints the configuration with every secret hidden', () => {
    const d = mkdtempSync(join(tmpdir(), 'tideline-cli-config-'));
    const secret = 'whsec-0123456789abcdef-do-not-print';
    const cfg = join(d, 'tideline.json');
    writeFileSync(
      cfg,
      JSON.stringify({
        signals: { webhooks: [{ name: 'mes', url: 'https://mes.example/hook', secret }], mqtt: { url: 'mqtt://127.0.0.1:1', password: 'mqtt-password-do-not-print' } },
        metrics: { access: 'token', token: 'metrics-token-do-not-print-0123456789' },
      }),
    );
    const r = cli(['config', '--config', cfg, '--data-dir', d]);
    expect(r.stderr).toBe('');
    expect(r.status).toBe(0);
    expect(r.stdout).not.toMatch(/do-not-print/);
    expect(r.stdout).toMatch(/"secret": "\(hidden, 35 characters\)"/);
    expect(r.stdout).toMatch(/"token": "\(hidden, 37 characters\)"/);
    expect(JSON.parse(r.stdout).signals.webhooks[0].url).toBe('https://mes.example/hook');
  }, 60_000);
});
