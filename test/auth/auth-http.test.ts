import { afterEach, describe, expect, it } from 'vitest';
import { Client, MODEL_HASH, addUser, startHarness, type Harness } from './harness.ts';

let h: Harness | null = null;
afterEach(async () => {
  await h?.close();
  h = null;
});

describe('login, sessions and CSRF', () => {
  it('login sets an HTTP-only SameSite=Strict session cookie and a CSRF token; /me and logout work', async () => {
    h = await startHarness();
    await addUser(h, 'vera', 'viewer');
    const c = new Client(h.base);
    const r = await c.login('vera', 'vera-password-123');
    expect(r.status).toBe(200);
    expect(r.json.user).toMatchObject({ name: 'vera', role: 'viewer', fullName: 'VERA' });
    const session = c.lastSetCookie.find((s) => s.startsWith('tideline_session='))!;
    expect(session).toMatch(/HttpOnly/i);
    expect(session).toMatch(/SameSite=Strict/i);
    expect(session).not.toMatch(/Secure/); // plain http in this test
    const csrf = c.lastSetCookie.find((s) => s.startsWith('tideline_csrf='))!;
    expect(csrf).not.toMatch(/HttpOnly/i);
    expect(r.json.csrfToken).toBe(c.cookies.get('tideline_csrf'));
    // the database holds only the hash of the session token
    const token = c.cookies.get('tideline_session')!;
    const rows = h.db.prepare('SELECT token_hash FROM auth_sessions').all() as { token_hash: string }[];
    expect(rows.map((x) => x.token_hash)).not.toContain(token);

    const me = await c.req('GET', '/api/auth/me');
    expect(me.status).toBe(200);
    expect(me.json.user.name).toBe('vera');
    expect((await c.req('POST', '/api/auth/logout')).status).toBe(204);
    // the old token is dead even if replayed
    const replay = new Client(h.base);
    replay.cookies.set('tideline_session', token);
    expect((await replay.req('GET', '/api/auth/me')).status).toBe(401);
    const actions = (await h.audit.list()).map((x) => x.action);
    expect(actions).toEqual(['user.create', 'auth.login', 'auth.logout']);
  });

  it('wrong password and unknown user give the same 401 and are audited', async () => {
    h = await startHarness();
    await addUser(h, 'olga', 'operator');
    const c = new Client(h.base);
    const a = await c.login('olga', 'not-her-password');
    const b = await c.login('nobody', 'not-her-password');
    expect(a.status).toBe(401);
    expect(b.status).toBe(401);
    expect(a.json.detail).toBe(b.json.detail);
    expect(a.headers.get('content-type')).toMatch(/application\/problem\+json/);
    const failed = (await h.audit.list({ action: 'auth.login.failed' }));
    expect(failed.map((x) => [x.object, x.reason])).toEqual([
      ['user:olga', 'wrong password'],
      ['user:nobody', 'unknown user'],
    ]);
  });

  it('writes need the CSRF header; a cookie alone is not enough', async () => {
    h = await startHarness();
    await addUser(h, 'olga', 'operator');
    const c = new Client(h.base);
    await c.login('olga', 'olga-password-123');
    const no = await c.req('POST', '/api/alarms/1/acknowledge', { comment: 'x' }, { csrf: false });
    expect(no.status).toBe(403);
    expect(no.json.detail).toMatch(/x-csrf-token/);
    const good = c.csrf;
    c.csrf = good!.slice(0, -2) + (good!.endsWith('AA') ? 'BB' : 'AA');
    const wrong = await c.req('POST', '/api/alarms/1/acknowledge', { comment: 'x' });
    expect(wrong.status).toBe(403);
    c.csrf = good;
    expect((await h.audit.list({ action: 'alarm.acknowledge' }))).toHaveLength(0);
    const ok = await c.req('POST', '/api/alarms/1/acknowledge', { comment: 'probe wiped' });
    expect(ok.status).toBe(200);
    expect((await h.audit.list({ action: 'alarm.acknowledge' }))[0]).toMatchObject({ user: 'olga', reason: 'probe wiped' });
  });

  it('sessions end after the idle time', async () => {
    h = await startHarness({ sessionIdleMinutes: 30 });
    await addUser(h, 'vera', 'viewer');
    const c = new Client(h.base);
    await c.login('vera', 'vera-password-123');
    h.clock.t += 29 * 60_000;
    expect((await c.req('GET', '/api/auth/me')).status).toBe(200);
    h.clock.t += 31 * 60_000;
    expect((await c.req('GET', '/api/auth/me')).status).toBe(401);
  });
});

describe('roles on state-changing routes', () => {
  it('a viewer cannot acknowledge, approve or deploy; an anonymous caller gets 401', async () => {
    h = await startHarness();
    const pw = await addUser(h, 'vera', 'viewer');
    const anon = new Client(h.base);
    const v = new Client(h.base);
    await v.login('vera', pw);
    const routes: [string, unknown][] = [
      ['/api/alarms/7/acknowledge', { comment: 'seen' }],
      ['/api/models/versions/dryer-a@1/approve', { password: pw, reason: 'looks fine' }],
      ['/api/deployments', { unit: 'dryer-1', versionId: 'dryer-a@1' }],
    ];
    for (const [path, body] of routes) {
      const r = await v.req('POST', path, body);
      expect(r.status, path).toBe(403);
      expect(r.json.detail).toMatch(/role .* or above; vera has the role viewer/);
      expect((await anon.req('POST', path, body)).status, path).toBe(401);
    }
    const m = h.db.prepare('SELECT status FROM test_models').get() as { status: string };
    expect(m.status).toBe('draft');
    expect(await h.auth.signaturesFor('model', 'dryer-a@1')).toEqual([]);
  });

  it('an operator may acknowledge but not approve or deploy; a model owner may deploy', async () => {
    h = await startHarness();
    const op = await addUser(h, 'olga', 'operator');
    const mo = await addUser(h, 'mona', 'model-owner');
    const o = new Client(h.base);
    await o.login('olga', op);
    expect((await o.req('POST', '/api/alarms/7/acknowledge', {})).status).toBe(200);
    expect((await o.req('POST', '/api/deployments', { unit: 'u' })).status).toBe(403);
    expect((await o.req('POST', '/api/models/versions/dryer-a@1/approve', { password: op, reason: 'x' })).status).toBe(403);
    const m = new Client(h.base);
    await m.login('mona', mo);
    expect((await m.req('POST', '/api/deployments', { unit: 'u' })).status).toBe(201);
    expect((await m.req('GET', '/api/auth/users')).status).toBe(403);
  });
});

describe('electronic signatures', () => {
  it('approval with the wrong password fails, changes nothing and is audited; the right password signs, bound to the hash', async () => {
    h = await startHarness();
    const pw = await addUser(h, 'mona', 'model-owner');
    const c = new Client(h.base);
    await c.login('mona', pw);
    const bad = await c.req('POST', '/api/models/versions/dryer-a@1/approve', { password: 'guess-guess-guess', reason: 'validated per protocol VP-12' });
    expect(bad.status).toBe(401);
    expect(bad.json.detail).toMatch(/password does not match/);
    expect((h.db.prepare('SELECT status FROM test_models').get() as { status: string }).status).toBe('draft');
    const failed = (await h.audit.list({ action: 'signature.failed' }));
    expect(failed).toHaveLength(1);
    expect(failed[0]).toMatchObject({ user: 'mona', object: 'model:dryer-a@1', reason: 'wrong password' });
    expect(JSON.parse(failed[0].after!)).toEqual({ meaning: 'approved', objectHash: MODEL_HASH });

    const blank = await c.req('POST', '/api/models/versions/dryer-a@1/approve', { password: pw, reason: '   ' });
    expect(blank.status).toBe(400);
    expect(blank.json.detail).toMatch(/reason/);

    const good = await c.req('POST', '/api/models/versions/dryer-a@1/approve', { password: pw, reason: 'validated per protocol VP-12' });
    expect(good.status).toBe(200);
    expect(good.json.signature).toMatchObject({ userName: 'mona', fullName: 'MONA', role: 'model-owner', meaning: 'approved', objectHash: MODEL_HASH, reason: 'validated per protocol VP-12' });
    expect((h.db.prepare('SELECT status FROM test_models').get() as { status: string }).status).toBe('approved');
    const list = await c.req('GET', '/api/auth/signatures?objectType=model&objectId=dryer-a@1');
    expect(list.json.items).toHaveLength(1);
    const sigAudit = (await h.audit.list({ action: 'signature.approved' }))[0];
    expect(sigAudit.seq).toBe(good.json.signature.auditSeq);
    expect((await h.audit.list({ action: 'model.approve' }))[0].seq).toBe(sigAudit.seq + 1);
    expect((await h.audit.verify()).ok).toBe(true);
    // signatures cannot be altered in the database
    expect(() => h!.db.prepare("UPDATE auth_signatures SET reason = 'x'").run()).toThrow(/append-only/);
  });

  it('a failing state change rolls the signature back', async () => {
    h = await startHarness();
    const pw = await addUser(h, 'mona', 'model-owner');
    const user = (await h.auth.users.byName('mona'))!;
    await expect(
      h.auth.sign({ user: { id: user.id, name: 'mona', fullName: 'MONA', role: 'model-owner' }, password: pw, reason: 'r', meaning: 'retired', objectType: 'model', objectId: 'm', objectHash: MODEL_HASH }, () => {
        throw new Error('model is deployed');
      }),
    ).rejects.toThrow('model is deployed');
    expect(await h.auth.signaturesFor('model', 'm')).toEqual([]);
    expect((await h.audit.list({ action: 'signature.' }))).toEqual([]);
  });
});

describe('login throttling', () => {
  it('engages after repeated failures: 429 with Retry-After even for the right password, audited, and lifts after the wait', async () => {
    h = await startHarness({ userFreeFailures: 3, lockBaseMs: 60_000 });
    const pw = await addUser(h, 'olga', 'operator');
    const c = new Client(h.base);
    for (let i = 0; i < 3; i++) expect((await c.login('olga', 'wrong-password-' + i)).status).toBe(401);
    const fourth = await c.login('olga', 'wrong-password-x');
    expect(fourth.status).toBe(401); // this failure engages the lock
    const locked = await c.login('olga', pw);
    expect(locked.status).toBe(429);
    expect(locked.headers.get('retry-after')).toBe('60');
    expect(locked.json.detail).toMatch(/too many failed attempts for this user: try again in 60 s/);
    expect((await h.audit.list({ action: 'auth.throttle' }))[0]).toMatchObject({ object: 'user:olga' });
    // another user from the same address is not locked out by olga's lock
    const pw2 = await addUser(h, 'otto', 'operator');
    expect((await new Client(h.base).login('otto', pw2)).status).toBe(200);
    h.clock.t += 60_001;
    expect((await c.login('olga', pw)).status).toBe(200);
  });

  it('engages per address when many user names are tried', async () => {
    h = await startHarness({ addressFreeFailures: 4, lockBaseMs: 5_000 });
    const c = new Client(h.base);
    for (let i = 0; i < 5; i++) expect((await c.login('user' + i, 'whatever-password')).status).toBe(401);
    const r = await c.login('user9', 'whatever-password');
    expect(r.status).toBe(429);
    expect(r.json.detail).toMatch(/from this address/);
  });
});

describe('bad requests', () => {
  it('oversized, malformed and ill-formed bodies are refused with problems naming the fault', async () => {
    h = await startHarness();
    const c = new Client(h.base);
    const big = await c.req('POST', '/api/auth/login', undefined, { raw: JSON.stringify({ name: 'a', password: 'x'.repeat(20_000) }) });
    expect(big.status).toBe(413);
    expect(big.json).toMatchObject({ type: '/problems/payload-too-large', status: 413 });
    expect(big.json.detail).toMatch(/larger than 16 KiB/);
    const bad = await c.req('POST', '/api/auth/login', undefined, { raw: '{"name": "a", "password": ' });
    expect(bad.status).toBe(400);
    expect(bad.json.type).toBe('/problems/malformed-json');
    const missing = await c.req('POST', '/api/auth/login', { name: 'a' });
    expect(missing.status).toBe(400);
    expect(missing.json.errors[0].path).toBe('password');
    const extra = await c.req('POST', '/api/auth/login', { name: 'a', password: 'b', admin: true });
    expect(extra.status).toBe(400);
    expect(extra.json.detail).toMatch(/admin/);
    const notJson = await c.req('POST', '/api/auth/login', undefined, { raw: 'name=a&password=b', contentType: 'application/x-www-form-urlencoded' });
    expect(notJson.status).toBe(400);
    expect(notJson.json.detail).toMatch(/application\/json/);
  });
});

describe('administration over HTTP', () => {
  it('an administrator manages users and analyzer tokens; tokens are stored hashed and revocable', async () => {
    h = await startHarness();
    const apw = await addUser(h, 'ada', 'administrator');
    const a = new Client(h.base);
    await a.login('ada', apw);
    const created = await a.req('POST', '/api/auth/users', { name: 'omar', role: 'operator', password: 'omar-password-1', fullName: 'Omar O.' });
    expect(created.status).toBe(201);
    expect(created.json).toMatchObject({ name: 'omar', role: 'operator', fullName: 'Omar O.' });
    expect(created.json).not.toHaveProperty('password_hash');
    expect((await a.req('POST', '/api/auth/users', { name: 'omar', role: 'operator', password: 'omar-password-1' })).status).toBe(409);
    expect((await a.req('POST', '/api/auth/users', { name: 'pat', role: 'operator', password: 'short' })).json.detail).toMatch(/at least 10/);
    expect((await a.req('POST', '/api/auth/users', { name: 'pat', role: 'boss', password: 'long-enough-pw' })).status).toBe(400);

    const o = new Client(h.base);
    await o.login('omar', 'omar-password-1');
    const up = await a.req('PATCH', '/api/auth/users/omar', { role: 'model-owner', reason: 'now owns the dryer model' });
    expect(up.json.role).toBe('model-owner');
    // the role change ended omar's session
    expect((await o.req('GET', '/api/auth/me')).status).toBe(401);
    const rec = (await h.audit.list({ action: 'user.update' }))[0];
    expect(JSON.parse(rec.before!)).toMatchObject({ role: 'operator' });
    expect(JSON.parse(rec.after!)).toMatchObject({ role: 'model-owner' });
    expect(rec.reason).toBe('now owns the dryer model');
    // the last administrator cannot be demoted
    expect((await a.req('PATCH', '/api/auth/users/ada', { role: 'viewer' })).status).toBe(409);

    const tok = await a.req('POST', '/api/auth/tokens', { analyzer: 'nir-7', label: 'dryer 1 probe' });
    expect(tok.status).toBe(201);
    expect(tok.json.token).toMatch(/^tla_/);
    expect(await h.auth.verifyAnalyzerToken(tok.json.token)).toBe('nir-7');
    expect(await h.auth.verifyAnalyzerToken(tok.json.token + 'x')).toBeNull();
    const stored = h.db.prepare('SELECT token_hash FROM auth_analyzer_tokens').all() as { token_hash: string }[];
    expect(JSON.stringify(stored)).not.toContain(tok.json.token);
    const list = await a.req('GET', '/api/auth/tokens');
    expect(list.json.items).toHaveLength(1);
    expect(JSON.stringify(list.json)).not.toContain(tok.json.token);
    expect((await a.req('DELETE', `/api/auth/tokens/${tok.json.id}`)).status).toBe(204);
    expect(await h.auth.verifyAnalyzerToken(tok.json.token)).toBeNull();
    expect((await a.req('DELETE', `/api/auth/tokens/${tok.json.id}`)).status).toBe(404);
    expect((await h.audit.list({ object: 'analyzer:nir-7' })).map((x) => x.action)).toEqual(['analyzer-token.create', 'analyzer-token.revoke']);
  });

  it('a user changes their own password with the current one; other sessions end', async () => {
    h = await startHarness();
    const pw = await addUser(h, 'vera', 'viewer');
    const c1 = new Client(h.base);
    const c2 = new Client(h.base);
    await c1.login('vera', pw);
    await c2.login('vera', pw);
    expect((await c1.req('POST', '/api/auth/password', { currentPassword: 'wrong-one-here', newPassword: 'brand-new-pass-1' })).status).toBe(401);
    expect((await c1.req('POST', '/api/auth/password', { currentPassword: pw, newPassword: 'brand-new-pass-1' })).status).toBe(204);
    expect((await c1.req('GET', '/api/auth/me')).status).toBe(200);
    expect((await c2.req('GET', '/api/auth/me')).status).toBe(401);
    expect((await new Client(h.base).login('vera', 'brand-new-pass-1')).status).toBe(200);
  });
});

describe('audit API', () => {
  it('lists with filters, verifies, exports CSV and JSON, and names the broken record after tampering', async () => {
    h = await startHarness();
    const pw = await addUser(h, 'vera', 'viewer');
    for (let i = 1; i <= 4; i++) await h.audit.record({ user: 'olga', action: 'alarm.acknowledge', object: `alarm:${i}`, reason: `c${i}` });
    const c = new Client(h.base);
    expect((await c.req('GET', '/api/audit')).status).toBe(401);
    await c.login('vera', pw);
    const l = await c.req('GET', '/api/audit?action=alarm.&order=desc&limit=2');
    expect(l.status).toBe(200);
    expect(l.json.total).toBe(4);
    expect(l.json.items.map((x: { object: string }) => x.object)).toEqual(['alarm:4', 'alarm:3']);
    expect((await c.req('GET', '/api/audit?limit=0')).status).toBe(400);
    expect((await c.req('GET', '/api/audit?from=yesterday')).json.detail).toMatch(/from: not a time/);
    expect((await c.req('GET', '/api/audit?colour=red')).json.detail).toMatch(/colour/);

    expect((await c.req('GET', '/api/audit/verify')).json).toMatchObject({ ok: true, count: 6 });
    const csv = await c.req('GET', '/api/audit/export?format=csv&action=alarm.');
    expect(csv.headers.get('content-type')).toMatch(/text\/csv/);
    expect(csv.headers.get('content-disposition')).toMatch(/attachment; filename="tideline-audit-.*\.csv"/);
    expect(csv.text.trim().split('\r\n')).toHaveLength(5);
    const js = await c.req('GET', '/api/audit/export?format=json');
    expect(js.json.format).toBe('tideline-audit-export');
    expect(js.json.records).toHaveLength(6);

    const db = h.db;
    db.exec('DROP TRIGGER audit_trail_no_update');
    db.prepare("UPDATE audit_trail SET reason = 'edited' WHERE seq = 4").run();
    const v = await c.req('GET', '/api/audit/verify');
    expect(v.json).toMatchObject({ ok: false, brokenSeq: 4 });
    expect(v.json.problem).toMatch(/record 4/);
  });
});

describe('live sockets and session end', () => {
  it('a socket opened with a session is closed (4401) after logout; one without a session at once', async () => {
    const { WebSocketServer, WebSocket } = await import('ws');
    h = await startHarness();
    const pw = await addUser(h, 'vera', 'viewer');
    const wss = new WebSocketServer({ host: '127.0.0.1', port: 0 });
    await new Promise((r) => wss.once('listening', r));
    wss.on('connection', (ws, req) => h!.auth.closeWhenSessionEnds(req, ws, 20));
    const url = `ws://127.0.0.1:${(wss.address() as import('node:net').AddressInfo).port}/live`;
    const closeCode = (ws: InstanceType<typeof WebSocket>) => new Promise<number>((r) => ws.once('close', (c) => r(c)));
    try {
      const anon = new WebSocket(url);
      expect(await closeCode(anon)).toBe(4401);
      const c = new Client(h.base);
      await c.login('vera', pw);
      const ws = new WebSocket(url, { headers: { cookie: [...c.cookies].map(([k, v]) => `${k}=${v}`).join('; ') } });
      await new Promise((r) => ws.once('open', r));
      const closed = closeCode(ws);
      let stillOpen = true;
      void closed.then(() => (stillOpen = false));
      await new Promise((r) => setTimeout(r, 100));
      expect(stillOpen).toBe(true); // a live session keeps it open
      expect((await c.req('POST', '/api/auth/logout')).status).toBe(204);
      expect(await closed).toBe(4401);
    } finally {
      wss.close();
    }
  });
});
