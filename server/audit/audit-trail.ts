/**
 * The audit trail: append-only, hash-chained (see record-hash.ts), UTC times. It seals records
 * and checks the chain; the records are stored behind the storage seam (server/storage
 * repositories.ts AuditRepository; SQLite: sqlite-audit.ts).
 */
import type { AuditQuery, AuditRepository, UnitOfWork, UnitOfWorkRunner } from '../storage/repositories.ts';
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

/** ISO string or ms epoch → ISO string comparable with the stored `at`. */
export function toIsoTime(t: string | number, what: string): string {
  const ms = typeof t === 'number' ? t : /^\d+$/.test(t) ? Number(t) : Date.parse(t);
  if (!Number.isFinite(ms)) throw new AuditInputError(`${what}: not a time (ISO 8601 or ms since epoch): ${String(t)}`);
  return new Date(ms).toISOString();
}

export interface ChainedAuditTrailOptions {
  /** Clock (ms epoch); default Date.now. */
  now?: () => number;
  /**
   * How many users the storage holds (every user's creation is audited): an empty trail beside
   * users means the records were deleted with the head, not never written. Absent: not checked.
   */
  countUsers?: () => Promise<number>;
}

/** Where the trail is stored: its repository, and units of work to append in. */
export interface AuditStorage extends UnitOfWorkRunner {
  readonly audit: AuditRepository;
}

export class ChainedAuditTrail implements AuditTrail {
  private readonly now: () => number;
  private readonly countUsers: (() => Promise<number>) | null;

  constructor(
    private readonly storage: AuditStorage,
    opts: ChainedAuditTrailOptions = {},
  ) {
    this.now = opts.now ?? Date.now;
    this.countUsers = opts.countUsers ?? null;
  }

  record(entry: AuditEntry, uow?: UnitOfWork): Promise<AuditRecord> {
    let checked: ReturnType<typeof check>;
    try {
      checked = check(entry);
    } catch (e) {
      return Promise.reject(e);
    }
    // The chain head is read and moved under the unit's write lock, so a second process (the CLI
    // beside the server) waits instead of reading the same head.
    return uow ? this.append(checked, uow) : this.storage.unitOfWork((u) => this.append(checked, u));
  }

  private async append(e: ReturnType<typeof check>, uow: UnitOfWork): Promise<AuditRecord> {
    const last = await uow.audit.last();
    const seq = last ? last.seq + 1 : 1;
    const prevHash = last ? last.hash : GENESIS_HASH;
    const at = new Date(this.now()).toISOString();
    const fields = { seq, at, ...e, prevHash };
    const rec = { ...fields, hash: recordHash(fields) };
    await uow.audit.append(rec);
    return rec;
  }

  async anchor(): Promise<AuditAnchor | null> {
    return this.storage.audit.last();
  }

  /** The chain, then the anchors, read in one unit of work so that the trail and its head are one state. */
  async verify(anchors: AuditAnchor[] = []): Promise<AuditVerifyResult> {
    const chain = await this.storage.unitOfWork(async (u) => {
      const c = await verifyChain(u.audit);
      if (!c.ok) return c;
      // Anchors: each names a record and its hash as they were when the anchor was taken outside.
      for (const a of [...anchors].sort((x, y) => x.seq - y.seq)) {
        const hash = await u.audit.hashAt(a.seq);
        if (hash === null) {
          return {
            ok: false as const,
            count: c.count,
            brokenSeq: c.count + 1,
            problem: `the anchor ${formatAnchor(a)} names record ${a.seq}, but the trail ends at record ${c.count}: records were removed from the end (and the head rewritten)`,
          };
        }
        if (hash !== a.hash) {
          return {
            ok: false as const,
            count: c.count,
            brokenSeq: a.seq,
            problem: `record ${a.seq} has hash ${hash.slice(0, 12)}…, but the anchor ${formatAnchor(a)} says ${a.hash.slice(0, 12)}…: the chain was rewritten at or before record ${a.seq}`,
          };
        }
      }
      return c;
    });
    if (chain.ok && chain.count === 0 && this.countUsers) {
      // An empty trail in a database that holds users: every user's creation is audited, so the
      // records were deleted (with the head) rather than never written.
      const users = await this.countUsers();
      if (users > 0) {
        return { ok: false, count: 0, brokenSeq: 1, problem: `the trail is empty, but the database holds ${users} user(s) whose creation is audited: the records and the chain head were deleted` };
      }
    }
    // No record: nothing was checked. Said in words, so that it is never read as a verified trail.
    if (chain.ok && chain.count === 0) return { ...chain, empty: true, note: EMPTY_TRAIL_NOTE };
    return chain;
  }

  private query(f: AuditFilter): AuditQuery {
    return {
      from: f.from !== undefined ? toIsoTime(f.from, 'from') : undefined,
      to: f.to !== undefined ? toIsoTime(f.to, 'to') : undefined,
      user: f.user,
      action: f.action,
      object: f.object,
      afterSeq: f.afterSeq,
    };
  }

  async list(filter: AuditFilter = {}): Promise<AuditRecord[]> {
    const limit = filter.limit ?? 200;
    if (!Number.isInteger(limit) || limit < 1 || limit > MAX_LIST)
      throw new AuditInputError(`limit must be an integer 1…${MAX_LIST}, got ${String(filter.limit)}`);
    return this.storage.audit.list({ ...this.query(filter), limit, descending: !!filter.descending });
  }

  async count(filter: AuditFilter = {}): Promise<number> {
    return this.storage.audit.count(this.query(filter));
  }

  async exportCsv(filter: AuditFilter = {}): Promise<string> {
    return auditToCsv(await this.storage.audit.list(this.query(filter)));
  }

  async exportJson(filter: AuditFilter = {}): Promise<string> {
    const rows = await this.storage.audit.list(this.query(filter));
    return auditToJson(rows, await this.verify(), new Date(this.now()).toISOString());
  }
}

/** An entry checked and in the form it is stored (canonical JSON, null for what is absent). */
function check(e: AuditEntry) {
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
  return { user, action: e.action, object: e.object, before, after, reason };
}

/** Walk the chain from the first record and name the first broken one; then check the stored head. */
async function verifyChain(repo: AuditRepository): Promise<AuditVerifyResult> {
  let expected = 1;
  let prevHash = GENESIS_HASH;
  let count = 0;
  for await (const r of repo.scan()) {
    if (r.seq !== expected) {
      return r.seq > expected
        ? { ok: false, count, brokenSeq: expected, problem: `record ${expected} is missing (the next record found is ${r.seq}): deleted` }
        : { ok: false, count, brokenSeq: r.seq, problem: `record ${r.seq} is out of order (expected ${expected})` };
    }
    if (r.prevHash !== prevHash) {
      return {
        ok: false,
        count,
        brokenSeq: r.seq,
        problem: `record ${r.seq}: prev_hash does not match the hash of record ${r.seq - 1} (that record or this link was changed)`,
      };
    }
    const h = recordHash({ seq: r.seq, at: r.at, user: r.user, action: r.action, object: r.object, before: r.before, after: r.after, reason: r.reason, prevHash: r.prevHash });
    if (h !== r.hash) return { ok: false, count, brokenSeq: r.seq, problem: `record ${r.seq}: content does not match its hash (the record was edited)` };
    prevHash = r.hash;
    expected++;
    count++;
  }
  const head = await repo.head();
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

/** What verify() says of a trail with no record (and no user in the database). */
export const EMPTY_TRAIL_NOTE = 'nothing to verify: the audit trail holds 0 records, so no chain was checked; this is no evidence of an intact trail';

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
