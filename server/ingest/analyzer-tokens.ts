/**
 * Analyzer tokens of the server core: 256-bit random tokens, stored only as their SHA-256 (a
 * random token of this length needs no slow hash; the digest is a lookup key, never reversible).
 * server/auth has its own token store; ingest accepts a token known to either.
 */
import { createHash, randomBytes } from 'node:crypto';
import type { Storage } from '../storage/storage.ts';

export function hashToken(token: string): string {
  return createHash('sha256').update(token, 'utf8').digest('hex');
}

export function newToken(): string {
  return 'tdl_' + randomBytes(32).toString('base64url');
}

/** Create a token for an analyzer (creating the analyzer when missing). Returns the token once. */
export async function createAnalyzerToken(storage: Storage, analyzer: string, now: number): Promise<string> {
  if (!(await storage.getAnalyzer(analyzer))) await storage.createAnalyzer({ id: analyzer, name: analyzer, createdAt: now });
  const token = newToken();
  await storage.addAnalyzerToken(analyzer, hashToken(token), now);
  return token;
}

/** The analyzer id the token belongs to, or null. */
export async function verifyAnalyzerToken(storage: Storage, token: string): Promise<string | null> {
  if (!token || token.length > 512) return null;
  return storage.findAnalyzerByTokenHash(hashToken(token));
}
