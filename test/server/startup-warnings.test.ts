/**
 * What a start says about the files it runs on: a broken audit trail is named at every start
 * (monitoring goes on), a new database and its folder are the service user's only, and a
 * configuration file holding secrets that others can read is named with the command that fixes it.
 */
import { spawn, spawnSync } from 'node:child_process';
import { chmodSync, mkdtempSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import { describe, expect, it } from 'vitest';
import { capturingLogger, startTestServer } from './helpers.ts';

describe('start-up warnings', () => {
  it('a broken audit trail is named at start, with the database file and the first broken record', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'tideline-warn-'));
    const first = await startTestServer({}, { dir });
    await first.server.ctx.audit!.record({ user: 'ada', action: 'unit.create', object: 'unit:x', after: { a: 1 } });
    await first.server.ctx.audit!.record({ user: 'ada', action: 'unit.create', object: 'unit:y', after: { a: 2 } });
    await first.server.close();
    const db = new Database(join(dir, 'tideline.db'));
    db.exec('DROP TRIGGER audit_trail_no_update');
    db.prepare("UPDATE audit_trail SET after = '{\"a\":3}' WHERE object = 'unit:x'").run();
    db.close();
    const log = capturingLogger();
    const again = await startTestServer({}, { dir, log });
    try {
      const line = log.lines.find((l) => /audit trail/.test(l.text));
      expect(line?.level).toBe('error');
      expect(line?.text).toContain(join(dir, 'tideline.db'));
      expect(line?.text).toMatch(/is BROKEN at record \d+: record \d+: content does not match its hash/);
      // Monitoring goes on.
      expect((await fetch(again.server.url + '/healthz')).status).toBe(200);
    } finally {
      await again.stop();
    }
  }, 120_000);

  it('a new database and the folder made for it are readable by the service user only', () => {
    const dir = join(mkdtempSync(join(tmpdir(), 'tideline-mode-')), 'data');
    const r = spawnSync(process.execPath, ['--import', 'tsx', 'server/cli.ts', 'migrate', '--data-dir', dir], { encoding: 'utf8' });
    expect(r.status, r.stderr).toBe(0);
    expect(statSync(dir).mode & 0o777).toBe(0o700);
    expect(statSync(join(dir, 'tideline.db')).mode & 0o777).toBe(0o600);
  }, 120_000);

  it('serve names a configuration file holding secrets that others can read, and never prints the secret', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'tideline-cfgmode-'));
    const cfg = join(dir, 'tideline.json');
    const secret = 'whsec-never-in-a-log-0123456789';
    writeFileSync(cfg, JSON.stringify({ signals: { webhooks: [{ name: 'mes', url: 'http://127.0.0.1:9/hook', secret }] } }));
    chmodSync(cfg, 0o644);
    const proc = spawn(process.execPath, ['--import', 'tsx', 'server/cli.ts', 'serve', '--config', cfg, '--data-dir', dir, '--port', '0', '--web-dir', 'none'], { stdio: ['ignore', 'pipe', 'pipe'] });
    let out = '';
    proc.stdout.on('data', (d) => (out += d));
    proc.stderr.on('data', (d) => (out += d));
    await new Promise<void>((res, rej) => {
      proc.on('exit', () => rej(new Error(`serve ended early: ${out}`)));
      const check = setInterval(() => {
        if (/Tideline is running at/.test(out)) {
          clearInterval(check);
          res();
        }
      }, 100);
    });
    proc.removeAllListeners('exit');
    const ended = new Promise((res) => proc.on('exit', res));
    proc.kill('SIGTERM');
    await ended;
    expect(out).toContain(`warning: the configuration file, which holds secrets, ${cfg} can be read by every user of this machine (mode 0644)`);
    expect(out).toContain(`chmod 600 ${cfg}`);
    expect(out).not.toContain(secret);
  }, 180_000);
});
