/**
 * SQLite audit trail: append-only, hash-chained (see record-hash.ts), UTC times.
 * Tables from server/storage/migrations/200-audit-trail.sql.
 */
import type Database from 'better-sqlite3';
import { canonicalJson } from './canonical-json.ts';
import { GENESIS_HASH, recordHash } from './record-hash.ts';
import { auditToCsv, auditToJson } from './audit-export.ts';
import {
  SYSTEM_ACTOR,
  type AuditAnchor,
  type AuditActor,
  type AuditEntry,
  type AuditFilter,
  type AuditRecord,
  type AuditTrail,
  type AuditVerifyResult,
} from './types.ts';

interface Row {
  seq: number;
  at: string;
  user: string;
  action: string;
  object: string;
  before: string | null;
  after: string | null;
  reason: string | null;
  prev_hash: string;
  hash: string;
}

const ACTION_RE = /^[a-z0-9][a-z0-9._-]*$/;
export const MAX_LIST = 10_000;

export class AuditInputError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'AuditInputError';
  }
}

function actorName(u: AuditActor | null | undefined): string {
  if (u === null || u === undefined) return SYSTEM_ACTOR;
  if (typeof u === 'string') return u.length > 0 ? u : SYSTEM_ACTOR;
  if (typeof u === 'object' && typeof u.name === 'string' && u.name.length > 0) return u.name;
  throw new AuditInputError('audit record: user must be a name or an object with a name');
}

function fromRow(r: Row): AuditRecord {
  return {
    seq: r.seq,
    at: r.at,
    user: r.user,
    action: r.action,
    object: r.object,
    before: r.before,
    after: r.after,
    reason: r.reason,
    prevHash: r.prev_hash,
    hash: r.hash,
  };
}

/** ISO string or ms epoch → ISO string comparable with the stored `at`. */
export function toIsoTime(t: string | number, what: string): string {
  const ms = typeof t === 'number' ? t : /^\d+$/.test(t) ? Number(t) : Date.parse(t);
  if (!Number.isFinite(ms)) throw new AuditInputError(`${what}: not a time (ISO 8601 or ms since epoch): ${String(t)}`);
  return new Date(ms).toISOString();
}

export interface SqliteAuditTrailOptions {
  /** Clock (ms epoch); default Date.now. */
  now?: () => number;
}

export class SqliteAuditTrail implements AuditTrail {
  private readonly now: () => number;
  private readonly lastStmt;
  private readonly insertStmt;
  private readonly headStmt;
  private readonly readHeadStmt;
  private readonly append: Database.Transaction<(e: AuditEntry) => AuditRecord>;

  constructor(
    readonly db: Database.Database,
    opts: SqliteAuditTrailOptions = {},
  ) {
    this.now = opts.now ?? Date.now;
    this.lastStmt = db.prepare('SELECT seq, hash FROM audit_trail ORDER BY seq DESC LIMIT 1');
    this.insertStmt = db.prepare(
      'INSERT INTO audit_trail (seq, at, user, action, object, before, after, reason, prev_hash, hash) VALUES (?,?,?,?,?,?,?,?,?,?)',
    );
    this.headStmt = db.prepare(
      'INSERT INTO audit_head (id, seq, hash) VALUES (1, ?, ?) ON CONFLICT(id) DO UPDATE SET seq = excluded.seq, hash = excluded.hash',
    );
    this.readHeadStmt = db.prepare('SELECT seq, hash FROM audit_head WHERE id = 1');
    this.append = db.transaction((e: AuditEntry) => this.appendInTx(e));
  }

  record(entry: AuditEntry): AuditRecord {
    // On its own: BEGIN IMMEDIATE, so a second process (the CLI beside the server) waits for the
    // write lock instead of reading the same chain head. Inside the caller's transaction: a savepoint.
    return this.db.inTransaction ? this.append(entry) : this.append.immediate(entry);
  }

  private appendInTx(e: AuditEntry): AuditRecord {
    const user = actorName(e.user);
    if (typeof e.action !== 'string' || !ACTION_RE.test(e.action) || e.action.length > 200)
      throw new AuditInputError(`audit record: action must be dotted lower-case words (a-z 0-9 . _ -), got ${JSON.stringify(e.action)}`);
    if (typeof e.object !== 'string' || e.object.length === 0 || e.object.length > 500)
      throw new AuditInputError('audit record: object must be a non-empty string of at most 500 characters');
    if (user.length > 200) throw new AuditInputError('audit record: user name longer than 200 characters');
    if (e.reason !== undefined && e.reason !== null && typeof e.reason !== 'string')
      throw new AuditInputError('audit record: reason must be a string');
    const reason = e.reason === undefined || e.reason === null || e.reason === '' ? null : e.reason;
    if (reason !== null && reason.length > 4000) throw new AuditInputError('audit record: reason longer than 4000 characters');
    const before = e.before === undefined ? null : canonicalJson(e.before);
    const after = e.after === undefined ? null : canonicalJson(e.after);

    const last = this.lastStmt.get() as { seq: number; hash: string } | undefined;
    const seq = last ? last.seq + 1 : 1;
    const prevHash = last ? last.hash : GENESIS_HASH;
    const at = new Date(this.now()).toISOString();
    const fields = { seq, at, user, action: e.action, object: e.object, before, after, reason, prevHash };
    const hash = recordHash(fields);
    this.insertStmt.run(seq, at, user, e.action, e.object, before, after, reason, prevHash, hash);
    this.headStmt.run(seq, hash);
    return { ...fields, hash };
  }

  anchor(): AuditAnchor | null {
    const last = this.lastStmt.get() as { seq: number; hash: string } | undefined;
    return last ? { seq: last.seq, hash: last.hash } : null;
  }

  verify(anchors: AuditAnchor[] = []): AuditVerifyResult {
    const chain = this.verifyChain();
    if (!chain.ok) return chain;
    // Anchors: each names a record and its hash as they were when the anchor was taken outside.
    const byseq = this.db.prepare('SELECT hash FROM audit_trail WHERE seq = ?');
    for (const a of [...anchors].sort((x, y) => x.seq - y.seq)) {
      const r = byseq.get(a.seq) as { hash: string } | undefined;
      if (!r) {
        return {
          ok: false,
          count: chain.count,
          brokenSeq: chain.count + 1,
          problem: `the anchor ${formatAnchor(a)} names record ${a.seq}, but the trail ends at record ${chain.count}: records were removed from the end (and the head rewritten)`,
        };
      }
      if (r.hash !== a.hash) {
        return {
          ok: false,
          count: chain.count,
          brokenSeq: a.seq,
          problem: `record ${a.seq} has hash ${r.hash.slice(0, 12)}…, but the anchor ${formatAnchor(a)} says ${a.hash.slice(0, 12)}…: the chain was rewritten at or before record ${a.seq}`,
        };
      }
    }
    if (chain.count === 0) {
      // An empty trail in a database that holds users: every user's creation is audited, so the
      // records were deleted (with the head) rather than never written.
      const users = this.db.prepare("SELECT name FROM sqlite_master WHERE type = 'table' AND name = 'auth_users'").get()
        ? (this.db.prepare('SELECT count(*) AS n FROM auth_users').get() as { n: number }).n
        : 0;
      if (users > 0) {
        return { ok: false, count: 0, brokenSeq: 1, problem: `the trail is empty, but the database holds ${users} user(s) whose creation is audited: the records and the chain head were deleted` };
      }
    }
    return chain;
  }

  private verifyChain(): AuditVerifyResult {
    const it = this.db.prepare('SELECT * FROM audit_trail ORDER BY seq').iterate() as IterableIterator<Row>;
    let expected = 1;
    let prevHash = GENESIS_HASH;
    let count = 0;
    for (const r of it) {
      if (r.seq !== expected) {
        // Stop the iterator before returning (frees the statement).
        it.return?.();
        return r.seq > expected
          ? { ok: false, count, brokenSeq: expected, problem: `record ${expected} is missing (the next record found is ${r.seq}): deleted` }
          : { ok: false, count, brokenSeq: r.seq, problem: `record ${r.seq} is out of order (expected ${expected})` };
      }
      if (r.prev_hash !== prevHash) {
        it.return?.();
        return {
          ok: false,
          count,
          brokenSeq: r.seq,
          problem: `record ${r.seq}: prev_hash does not match the hash of record ${r.seq - 1} (that record or this link was changed)`,
        };
      }
      const h = recordHash({
        seq: r.seq,
        at: r.at,
        user: r.user,
        action: r.action,
        object: r.object,
        before: r.before,
        after: r.after,
        reason: r.reason,
        prevHash: r.prev_hash,
      });
      if (h !== r.hash) {
        it.return?.();
        return { ok: false, count, brokenSeq: r.seq, problem: `record ${r.seq}: content does not match its hash (the record was edited)` };
      }
      prevHash = r.hash;
      expected++;
      count++;
    }
    const head = this.readHeadStmt.get() as { seq: number; hash: string } | undefined;
    const lastSeq = expected - 1;
    if (head && (head.seq !== lastSeq || head.hash !== prevHash)) {
      if (head.seq > lastSeq)
        return {
          ok: false,
          count,
          brokenSeq: lastSeq + 1,
          problem: `records ${lastSeq + 1}…${head.seq} are missing from the end of the trail (the chain head says ${head.seq})`,
        };
      return { ok: false, count, brokenSeq: head.seq, problem: `the chain head (record ${head.seq}) does not match record ${head.seq} in the trail` };
    }
    if (!head && count > 0) return { ok: false, count, brokenSeq: lastSeq, problem: 'the chain head record is missing' };
    return { ok: true, count, headSeq: lastSeq, headHash: prevHash };
  }

  private where(f: AuditFilter): { sql: string; args: unknown[] } {
    const conds: string[] = [];
    const args: unknown[] = [];
    if (f.from !== undefined) {
      conds.push('at >= ?');
      args.push(toIsoTime(f.from, 'from'));
    }
    if (f.to !== undefined) {
      conds.push('at < ?');
      args.push(toIsoTime(f.to, 'to'));
    }
    if (f.user) {
      conds.push('user = ?');
      args.push(f.user);
    }
    // 'model.' matches every model action and 'batch:' every batch; anything else matches exactly.
    const prefixOrExact = (column: 'action' | 'object', value: string | undefined, prefixEnd: string) => {
      if (!value) return;
      if (value.endsWith(prefixEnd)) {
        conds.push(`substr(${column}, 1, ?) = ?`);
        args.push(value.length, value);
      } else {
        conds.push(`${column} = ?`);
        args.push(value);
      }
    };
    prefixOrExact('action', f.action, '.');
    prefixOrExact('object', f.object, ':');
    if (f.afterSeq !== undefined) {
      conds.push('seq > ?');
      args.push(f.afterSeq);
    }
    return { sql: conds.length ? ' WHERE ' + conds.join(' AND ') : '', args };
  }

  list(filter: AuditFilter = {}): AuditRecord[] {
    const limit = filter.limit ?? 200;
    if (!Number.isInteger(limit) || limit < 1 || limit > MAX_LIST)
      throw new AuditInputError(`limit must be an integer 1…${MAX_LIST}, got ${String(filter.limit)}`);
    const w = this.where(filter);
    const order = filter.descending ? 'DESC' : 'ASC';
    const rows = this.db.prepare(`SELECT * FROM audit_trail${w.sql} ORDER BY seq ${order} LIMIT ?`).all(...w.args, limit) as Row[];
    return rows.map(fromRow);
  }

  count(filter: AuditFilter = {}): number {
    const w = this.where(filter);
    return (this.db.prepare(`SELECT count(*) AS n FROM audit_trail${w.sql}`).get(...w.args) as { n: number }).n;
  }

  private all(filter: AuditFilter): AuditRecord[] {
    const w = this.where(filter);
    return (this.db.prepare(`SELECT * FROM audit_trail${w.sql} ORDER BY seq`).all(...w.args) as Row[]).map(fromRow);
  }

  exportCsv(filter: AuditFilter = {}): string {
    return auditToCsv(this.all(filter));
  }

  exportJson(filter: AuditFilter = {}): string {
    return auditToJson(this.all(filter), this.verify(), new Date(this.now()).toISOString());
  }
}

/** `SEQ:HASH`, the written form of an anchor. */
export function formatAnchor(a: AuditAnchor): string {
  return `${a.seq}:${a.hash}`;
}

/**
 * Anchors found in text: every `SEQ:HASH` (HASH = 64 hex digits) — a pasted anchor, a file of them,
 * a saved webhook body or a report's text all work. Throws when the text holds none.
 */
export function parseAnchors(text: string, what = 'anchor'): AuditAnchor[] {
  const out: AuditAnchor[] = [];
  for (const m of text.matchAll(/\b(\d{1,15}):([0-9a-fA-F]{64})\b/g)) out.push({ seq: Number(m[1]), hash: m[2]!.toLowerCase() });
  if (out.length === 0) throw new AuditInputError(`${what}: no anchor of the form SEQ:HASH (a record number, a colon and 64 hex digits) in ${JSON.stringify(text.slice(0, 80))}`);
  return out;
}
