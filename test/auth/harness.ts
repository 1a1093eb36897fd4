/**
 * A real express app on 127.0.0.1:0 with a real SQLite database, the auth and audit modules
 * installed through their install(ctx), and a few routes guarded the way the server guards its
 * state-changing routes (for tests that run before/without the full server).
 */
import express from 'express';
import type { AddressInfo } from 'node:net';
import type { Server } from 'node:http';
import { install as installAuth } from '../../server/auth/index.ts';
import { install as installAudit } from '../../server/audit/index.ts';
import type { SecurityHost } from '../../server/auth/security-setup.ts';
import { AuthService } from '../../server/auth/auth-service.ts';
import { ChainedAuditTrail } from '../../server/audit/audit-trail.ts';
import { SignatureError } from '../../server/auth/types.ts';
import { openTestDb } from '../audit/db-fixture.ts';

export interface Harness {
  base: string;
  host: SecurityHost;
  /** The SQLite connection under the harness (for the stand-in model table and for tampering). */
  db: ReturnType<typeof openTestDb>['db'];
  auth: AuthService;
  audit: ChainedAuditTrail;
  clock: { t: number };
  close(): Promise<void>;
}

export const MODEL_HASH = 'a'.repeat(64);

export async function startHarness(authConfig: Record<string, unknown> = {}): Promise<Harness> {
  const { db, storage } = openTestDb();
  // A stand-in for the server's model table, so approval has a state to change.
  db.exec("CREATE TABLE test_models (id TEXT PRIMARY KEY, sha256 TEXT NOT NULL, status TEXT NOT NULL DEFAULT 'draft')");
  db.prepare('INSERT INTO test_models (id, sha256) VALUES (?, ?)').run('dryer-a@1', MODEL_HASH);
  const clock = { t: Date.UTC(2026, 5, 1, 6, 0, 0) };
  const api = express.Router();
  const host: SecurityHost = {
    storage,
    api,
    config: { auth: { scryptLog2N: 12, ...authConfig } },
    now: () => clock.t,
  };
  installAuth(host);
  installAudit(host);
  const auth = host.auth as AuthService;
  const audit = host.audit as ChainedAuditTrail;

  api.use(express.json({ limit: '16kb' }));
  api.post('/alarms/:id/acknowledge', auth.requireRole('operator'), async (req, res) => {
    await audit.record({ user: req.user, action: 'alarm.acknowledge', object: `alarm:${String(req.params.id)}`, reason: req.body?.comment });
    res.json({ ok: true });
  });
  api.post('/deployments', auth.requireRole('model-owner'), async (req, res) => {
    await audit.record({ user: req.user, action: 'model.deploy', object: `unit:${String(req.body?.unit)}` });
    res.status(201).json({ ok: true });
  });
  api.post('/models/versions/:v/approve', auth.requireRole('model-owner'), async (req, res) => {
    const m = db.prepare('SELECT * FROM test_models WHERE id = ?').get(String(req.params.v)) as { id: string; sha256: string; status: string } | undefined;
    if (!m) return void res.status(404).json({ title: 'no such model' });
    try {
      const out = await auth.sign(
        { user: req.user!, password: req.body?.password, reason: req.body?.reason, meaning: 'approved', objectType: 'model', objectId: m.id, objectHash: m.sha256, address: req.ip },
        async (_sig, uow) => {
          db.prepare("UPDATE test_models SET status = 'approved' WHERE id = ?").run(m.id);
          await audit.record({ user: req.user, action: 'model.approve', object: `model:${m.id}`, before: { status: m.status }, after: { status: 'approved' }, reason: req.body?.reason }, uow);
        },
      );
      res.json({ status: 'approved', signature: out.signature });
    } catch (e) {
      if (e instanceof SignatureError) return void res.status(e.status).type('application/problem+json').send(JSON.stringify({ type: '/problems/signature', title: 'Signature refused', status: e.status, detail: e.message }));
      throw e;
    }
  });

  const app = express();
  app.set('trust proxy', false);
  app.use('/api', api);
  const server: Server = await new Promise((resolve) => {
    const s = app.listen(0, '127.0.0.1', () => resolve(s));
  });
  const port = (server.address() as AddressInfo).port;
  return {
    base: `http://127.0.0.1:${port}`,
    host,
    db,
    auth,
    audit,
    clock,
    close: async () => {
      await new Promise<void>((r) => server.close(() => r()));
      await storage.close();
    },
  };
}

/** A browser-like client: keeps cookies, sends the CSRF header on writes. */
export class Client {
  cookies = new Map<string, string>();
  csrf: string | null = null;
  lastSetCookie: string[] = [];
  constructor(readonly base: string) {}

  async req(method: string, path: string, body?: unknown, opts: { csrf?: boolean; raw?: string; contentType?: string } = {}) {
    const headers: Record<string, string> = {};
    if (this.cookies.size) headers.cookie = [...this.cookies].map(([k, v]) => `${k}=${v}`).join('; ');
    if (opts.raw !== undefined || body !== undefined) headers['content-type'] = opts.contentType ?? 'application/json';
    if ((opts.csrf ?? true) && this.csrf && method !== 'GET') headers['x-csrf-token'] = this.csrf;
    const init = { method, headers, body: opts.raw ?? (body === undefined ? undefined : JSON.stringify(body)) };
    let res: Response;
    try {
      res = await fetch(this.base + path, init);
    } catch (e) {
      // A pooled keep-alive socket the server had just closed (idle timeout): the request never
      // reached the server; send it once more on a fresh connection.
      const code = (e as { cause?: { code?: string } }).cause?.code;
      if (code !== 'ECONNRESET' && code !== 'UND_ERR_SOCKET') throw e;
      res = await fetch(this.base + path, init);
    }
    this.lastSetCookie = res.headers.getSetCookie();
    for (const c of this.lastSetCookie) {
      const [kv] = c.split(';');
      const i = kv.indexOf('=');
      const k = kv.slice(0, i);
      const v = kv.slice(i + 1);
      if (v === '' || /expires=Thu, 01 Jan 1970/i.test(c)) this.cookies.delete(k);
      else this.cookies.set(k, v);
    }
    const text = await res.text();
    let json: any = null;
    try {
      json = text ? JSON.parse(text) : null;
    } catch {
      json = null;
    }
    return { status: res.status, headers: res.headers, text, json };
  }

  async login(name: string, password: string) {
    const r = await this.req('POST', '/api/auth/login', { name, password });
    if (r.status === 200) this.csrf = r.json.csrfToken;
    return r;
  }
}

export async function addUser(h: Harness, name: string, role: 'viewer' | 'operator' | 'model-owner' | 'administrator', password = `${name}-password-123`) {
  await h.auth.createUser({ name, role, password, fullName: name.toUpperCase() }, 'test');
  return password;
}
