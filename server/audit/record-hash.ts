/**
 * The hash chain of the audit trail.
 *
 * hash = SHA-256 (FIPS 180-4), lower-case hex, of the UTF-8 bytes of
 *   JSON.stringify([seq, at, user, action, object, before, after, reason, prevHash])
 * where before/after are the stored canonical JSON texts (or null). A JSON array of strings,
 * integers and nulls has exactly one JSON.stringify form, so anyone can recompute the chain from
 * an export (docs/security.md shows it in a few lines of Python).
 */
import { createHash } from 'node:crypto';

export const GENESIS_HASH = '0'.repeat(64);

export interface HashedFields {
  seq: number;
  at: string;
  user: string;
  action: string;
  object: string;
  before: string | null;
  after: string | null;
  reason: string | null;
  prevHash: string;
}

export function recordSerialization(r: HashedFields): string {
  return JSON.stringify([r.seq, r.at, r.user, r.action, r.object, r.before, r.after, r.reason, r.prevHash]);
}

export function recordHash(r: HashedFields): string {
  return createHash('sha256').update(recordSerialization(r), 'utf8').digest('hex');
}
