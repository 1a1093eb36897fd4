/**
 * Analyzer tokens, the one store /ingest checks: random 256-bit secrets prefixed `tla_`, shown once
 * at creation and stored as SHA-256 only (server/storage AnalyzerTokenRepository). A token with 256
 * bits of entropy cannot be guessed, so a fast hash suffices (a slow password hash is for
 * low-entropy secrets) and lets the /ingest upgrade look the token up directly.
 *
 * Tokens issued by versions before migration 203 with the analyzer (`tdl_…`) were carried into the
 * same store with their hash, so those analyzers keep connecting; they are listed with ids
 * `interim-<n>` and revoked like any other.
 */
import { randomUUID } from 'node:crypto';
import type { AnalyzerTokenRepository, AnalyzerTokenRow } from '../storage/repositories.ts';
import { randomToken, sha256Hex } from './session-store.ts';
import type { AnalyzerTokenInfo } from './types.ts';

export const ANALYZER_ID_RE = /^[A-Za-z0-9][A-Za-z0-9._:-]{0,63}$/;
export const TOKEN_PREFIX = 'tla_';

function view(r: AnalyzerTokenRow): AnalyzerTokenInfo {
  return { id: r.id, analyzer: r.analyzer, label: r.label, createdAt: r.createdAt, createdBy: r.createdBy, revokedAt: r.revokedAt, revokedBy: r.revokedBy, lastUsedAt: r.lastUsedAt };
}

export class AnalyzerTokenStore {
  constructor(
    private readonly repo: AnalyzerTokenRepository,
    private readonly now: () => number,
  ) {}

  /** A new token; through `repo` (a unit of work's) when given. */
  async create(analyzer: string, label: string, createdBy: string, repo: AnalyzerTokenRepository = this.repo): Promise<{ id: string; token: string; info: AnalyzerTokenInfo }> {
    if (!ANALYZER_ID_RE.test(analyzer)) throw new Error(`analyzer id must be 1–64 characters of A-Z a-z 0-9 . _ : - (got ${JSON.stringify(analyzer)})`);
    if (label.length > 200) throw new Error('token label longer than 200 characters');
    const id = randomUUID();
    const token = TOKEN_PREFIX + randomToken(32);
    const at = new Date(this.now()).toISOString();
    await repo.insert({ id, analyzer, label, tokenHash: sha256Hex(token), createdAt: at, createdBy });
    return { id, token, info: view((await repo.get(id))!) };
  }

  /** Analyzer id of a valid (not revoked) token, or null. */
  async verify(token: string): Promise<string | null> {
    if (typeof token !== 'string' || token.length < 8 || token.length > 200) return null;
    const h = sha256Hex(token);
    const r = await this.repo.findActive(h);
    if (!r) return null;
    const at = new Date(this.now()).toISOString();
    // Keep writes rare: record use at most once a minute.
    if (!r.lastUsedAt || Date.parse(at) - Date.parse(r.lastUsedAt) > 60_000) await this.repo.touch(r.id, at);
    return r.analyzer;
  }

  async get(id: string, repo: AnalyzerTokenRepository = this.repo): Promise<AnalyzerTokenInfo | undefined> {
    const r = await repo.get(id);
    return r ? view(r) : undefined;
  }

  async list(): Promise<AnalyzerTokenInfo[]> {
    return (await this.repo.list()).map(view);
  }

  /** true when revoked now; false when unknown or already revoked. Through `repo` (a unit of work's) when given. */
  async revoke(id: string, by: string, repo: AnalyzerTokenRepository = this.repo): Promise<boolean> {
    return repo.revoke(id, new Date(this.now()).toISOString(), by);
  }
}
