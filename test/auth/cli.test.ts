import { describe, expect, it } from 'vitest';
import express from 'express';
import { runSecurityCli, type CliIo } from '../../server/auth/cli.ts';
import { ensureDemoAdministrator } from '../../server/auth/demo-admin.ts';
import { createSecurity } from '../../server/auth/security-setup.ts';
import { openTestDb } from '../audit/db-fixture.ts';

const config = { auth: { scryptLog2N: 12 } };

function io(stdin = ''): CliIo & { lines: string[]; errors: string[] } {
  const lines: string[] = [];
  const errors: string[] = [];
  return { lines, errors, out: (s) => lines.push(s), err: (s) => errors.push(s), readStdin: async () => stdin };
}

describe('security CLI', () => {
  it('user add creates the first administrator with a printed one-time password that logs in', async () => {
    const { db, storage } = openTestDb();
    const o = io();
    expect(await runSecurityCli(['user', 'add', '--role', 'administrator', '--full-name', 'Ada L.', 'ada'], { storage, config }, o)).toBe(0);
    expect(o.lines[0]).toBe('created user ada (administrator)');
    const pw = /password: (\S+)/.exec(o.lines.join('\n'))![1];
    const { auth, audit } = createSecurity(storage, config);
    const r = await auth.login('ada', pw, '127.0.0.1');
    expect(r.user).toMatchObject({ name: 'ada', role: 'administrator', fullName: 'Ada L.' });
    expect(r.mustChangePassword).toBe(true);
    const first = (await audit.list())[0]!;
    expect(first).toMatchObject({ action: 'user.create', object: 'user:ada' });
    expect(first.user).toMatch(/^cli:/);
  });

  it('takes the password from stdin, refuses bad input with exit code 2', async () => {
    const { db, storage } = openTestDb();
    expect(await runSecurityCli(['user', 'add', '--role', 'operator', '--password-stdin', 'olga'], { storage, config }, io('olga-secret-pw\n'))).toBe(0);
    const { auth } = createSecurity(storage, config);
    expect((await auth.login('olga', 'olga-secret-pw', 'x')).user.role).toBe('operator');
    const e1 = io();
    expect(await runSecurityCli(['user', 'add', '--role', 'king', 'x1'], { storage, config }, e1)).toBe(2);
    expect(e1.errors[0]).toMatch(/--role must be one of/);
    const e2 = io('short\n');
    expect(await runSecurityCli(['user', 'add', '--role', 'viewer', '--password-stdin', 'x2'], { storage, config }, e2)).toBe(2);
    expect(e2.errors[0]).toMatch(/at least 10/);
    const e3 = io();
    expect(await runSecurityCli(['user', 'frobnicate'], { storage, config }, e3)).toBe(2);
    expect(e3.errors[0]).toMatch(/usage/);
  });

  it('audit verify on an empty trail with no user says there is nothing to verify, never "intact"', async () => {
    const { storage } = openTestDb();
    const v = io();
    expect(await runSecurityCli(['audit', 'verify'], { storage, config }, v)).toBe(0);
    expect(v.lines).toEqual(['audit trail empty: nothing to verify: the audit trail holds 0 records, so no chain was checked; this is no evidence of an intact trail']);
    expect(v.lines.join('\n')).not.toMatch(/intact:|anchor \(keep/);
  });

  it('token add/list/revoke and audit verify/export', async () => {
    const { db, storage } = openTestDb();
    const a = io();
    expect(await runSecurityCli(['token', 'add', '--label', 'probe 1', 'nir-1'], { storage, config }, a)).toBe(0);
    const token = /^(tla_\S+)$/m.exec(a.lines.join('\n'))![1];
    const { auth } = createSecurity(storage, config);
    expect(await auth.verifyAnalyzerToken(token)).toBe('nir-1');
    const l = io();
    await runSecurityCli(['token', 'list'], { storage, config }, l);
    const id = l.lines[0].split('\t')[0];
    expect(l.lines[0]).toMatch(/nir-1\tactive/);
    expect(await runSecurityCli(['token', 'revoke', id], { storage, config }, io())).toBe(0);
    expect(await auth.verifyAnalyzerToken(token)).toBeNull();

    const v = io();
    expect(await runSecurityCli(['audit', 'verify'], { storage, config }, v)).toBe(0);
    expect(v.lines[0]).toMatch(/intact: 2 records/);
    const x = io();
    expect(await runSecurityCli(['audit', 'export', '--format', 'csv'], { storage, config }, x)).toBe(0);
    expect(x.lines[0].split('\r\n')).toHaveLength(4);

    db.exec('DROP TRIGGER audit_trail_no_delete');
    db.prepare('DELETE FROM audit_trail WHERE seq = 1').run();
    const b = io();
    expect(await runSecurityCli(['audit', 'verify'], { storage, config }, b)).toBe(1);
    expect(b.lines[0]).toMatch(/BROKEN at record 1: record 1 is missing/);
  });

  it('the demo administrator is created with a random password and a plain warning, renewed on the next start', async () => {
    const { db, storage } = openTestDb();
    const host = { storage, api: express.Router(), config };
    const d1 = await ensureDemoAdministrator(host);
    expect(d1.name).toBe('demo-admin');
    expect(d1.password).toHaveLength(20);
    expect(d1.notice).toContain(d1.password);
    expect(d1.notice).toMatch(/DEMO credentials/);
    expect(d1.notice).toMatch(/A real site must not use them/);
    const d2 = await ensureDemoAdministrator(host);
    expect(d2.password).not.toBe(d1.password);
    const { auth } = createSecurity(storage, config);
    await expect(auth.login('demo-admin', d1.password, 'a')).rejects.toThrow(/wrong/);
    expect((await auth.login('demo-admin', d2.password, 'a')).user.role).toBe('administrator');
  });
});
