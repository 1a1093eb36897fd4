/**
 * Analyzer tokens (table auth_analyzer_tokens): random 256-bit secrets prefixed `tla_`, shown
 * once at creation and stored as SHA-256 only. A token with 256 bits of entropy cannot be
 * guessed, so a fast hash suffices (a slow password hash is for low-entropy secrets) and lets the
 * /ingest upgrade look the token up directly.
 *
 * Wraps the server's earlier table `analyzer_tokens` (migration 001: SHA-256 too) when it
 * exists: tokens found there are accepted, listed with ids `interim-<n>` and can be revoked here,
 * so tokens made before auth was installed keep working and stay under the administrator's control.
 */
import type Database from 'better-sqlite3';
import { randomUUID } from 'node:crypto';
import { randomToken, sha256Hex } from './session-store.ts';
import type { AnalyzerTokenInfo } from './types.ts';

export const ANALYZER_ID_RE = /^[A-Za-z0-9][A-Za-z0-9._:-]{0,63}$/;
export const TOKEN_PREFIX = 'tla_';

interface Row {
  id: string;
  analyzer: string;
  label: string;
  token_hash: string;
  created_at: string;
  created_by: string;
  revoked_at: string | null;
  revoked_by: string | null;
  last_used_at: string | null;
}

function view(r: Row): AnalyzerTokenInfo {
  return {
    id: r.id,
    analyzer: r.analyzer,
    label: r.label,
    createdAt: r.created_at,
    createdBy: r.created_by,
    revokedAt: r.revoked_at,
    revokedBy: r.revoked_by,
    lastUsedAt: r.last_used_at,
  };
}

export class AnalyzerTokenStore {
  private readonly findStmt;
  private readonly touchStmt;
  private readonly interim: boolean;

  constructor(
    private readonly db: Database.Database,
    private readonly now: () => number,
  ) {
    this.findStmt = db.prepare('SELECT id, analyzer, last_used_at FROM auth_analyzer_tokens WHERE token_hash = ? AND revoked_at IS NULL');
    this.touchStmt = db.prepare('UPDATE auth_analyzer_tokens SET last_used_at = ? WHERE id = ?');
    const cols = db.prepare("SELECT name FROM pragma_table_info('analyzer_tokens')").all() as { name: string }[];
    const have = new Set(cols.map((c) => c.name));
    this.interim = ['id', 'analyzer', 'token_sha256', 'created_at', 'revoked_at'].every((c) => have.has(c));
  }

  private interimFind(hash: string): string | null {
    if (!this.interim) return null;
    const r = this.db.prepare('SELECT analyzer FROM analyzer_tokens WHERE token_sha256 = ? AND revoked_at IS NULL').get(hash) as
      | { analyzer: string }
      | undefined;
    return r ? r.analyzer : null;
  }

  private interimList(): AnalyzerTokenInfo[] {
    if (!this.interim) return [];
    const rows = this.db.prepare('SELECT id, analyzer, created_at, revoked_at FROM analyzer_tokens ORDER BY id').all() as {
      id: number;
      analyzer: string;
      created_at: number;
      revoked_at: number | null;
    }[];
    return rows.map((r) => ({
      id: `interim-${r.id}`,
      analyzer: r.analyzer,
      label: '(made with the analyzer)',
      createdAt: new Date(r.created_at).toISOString(),
      createdBy: '',
      revokedAt: r.revoked_at === null ? null : new Date(r.revoked_at).toISOString(),
      revokedBy: null,
      lastUsedAt: null,
    }));
  }

  create(analyzer: string, label: string, createdBy: string): { id: string; token: string; info: AnalyzerTokenInfo } {
    if (!ANALYZER_ID_RE.test(analyzer)) throw new Error(`analyzer id must be 1–64 characters of A-Z a-z 0-9 . _ : - (got ${JSON.stringify(analyzer)})`);
    if (label.length > 200) throw new Error('token label longer than 200 characters');
    const id = randomUUID();
    const token = TOKEN_PREFIX + randomToken(32);
    const at = new Date(this.now()).toISOString();
    this.db
      .prepare('INSERT INTO auth_analyzer_tokens (id, analyzer, label, token_hash, created_at, created_by) VALUES (?,?,?,?,?,?)')
      .run(id, analyzer, label, sha256Hex(token), at, createdBy);
    return { id, token, info: this.get(id)! };
  }

  /** Analyzer id of a valid (not revoked) token, or null. */
  verify(token: string): string | null {
    if (typeof token !== 'string' || token.length < 8 || token.length > 200) return null;
    const h = sha256Hex(token);
    const r = this.findStmt.get(h) as { id: string; analyzer: string; last_used_at: string | null } | undefined;
    if (!r) return this.interimFind(h);
    const at = new Date(this.now()).toISOString();
    // Keep writes rare: record use at most once a minute.
    if (!r.last_used_at || Date.parse(at) - Date.parse(r.last_used_at) > 60_000) this.touchStmt.run(at, r.id);
    return r.analyzer;
  }

  get(id: string): AnalyzerTokenInfo | undefined {
    if (id.startsWith('interim-')) return this.interimList().find((t) => t.id === id);
    const r = this.db.prepare('SELECT * FROM auth_analyzer_tokens WHERE id = ?').get(id) as Row | undefined;
    return r ? view(r) : undefined;
  }

  list(): AnalyzerTokenInfo[] {
    return [...this.interimList(), ...(this.db.prepare('SELECT * FROM auth_analyzer_tokens ORDER BY created_at, id').all() as Row[]).map(view)];
  }

  /** true when revoked now; false when unknown or already revoked. */
  revoke(id: string, by: string): boolean {
    if (id.startsWith('interim-')) {
      if (!this.interim) return false;
      return this.db.prepare('UPDATE analyzer_tokens SET revoked_at = ? WHERE id = ? AND revoked_at IS NULL').run(this.now(), Number(id.slice(8))).changes === 1;
    }
    const at = new Date(this.now()).toISOString();
    return this.db.prepare('UPDATE auth_analyzer_tokens SET revoked_at = ?, revoked_by = ? WHERE id = ? AND revoked_at IS NULL').run(at, by, id).changes === 1;
  }
}
