/**
 * The audit trail contract. Other parts of the server write audit records through
 * `ctx.audit.record(...)`; the implementation is server/audit/audit-trail.ts.
 *
 * Every record carries UTC time, user, action, object, before/after where it applies, and a
 * reason; each record stores the SHA-256 of the previous record, so an edited or deleted row
 * breaks the chain and `verify()` names the first broken record.
 */

import type { AuditRecord } from '../../core/api/audit.ts';
import type { UnitOfWork } from '../storage/repositories.ts';

/** Who did it: a user name, or an object carrying one (an AuthUser, `req.user`). */
export type AuditActor = string | { name: string };

/** The user name written for actions the server takes on its own. */
export const SYSTEM_ACTOR = 'system';

export interface AuditEntry {
  /** Who: user name, `analyzer:<id>` for an analyzer, or 'system'. */
  user: AuditActor | null | undefined;
  /** What was done, dotted lower-case, e.g. 'model.approve', 'alarm.acknowledge', 'auth.login'. */
  action: string;
  /** What it was done to, `<kind>:<id>`, e.g. 'model:dryer-a@3', 'alarm:42', 'user:alice'. */
  object: string;
  /** State before the change (any JSON value), where it applies. */
  before?: unknown;
  /** State after the change (any JSON value), where it applies. */
  after?: unknown;
  /** Why (the user's comment or the reason of a signature). */
  reason?: string | null;
}

/** One record of the trail as stored and served (shared with the dashboard through core/api). */
export type { AuditRecord };

export interface AuditFilter {
  /** ISO time or ms epoch; inclusive. */
  from?: string | number;
  /** ISO time or ms epoch; exclusive. */
  to?: string | number;
  user?: string;
  /** Exact action, or a prefix ending in '.', e.g. 'model.' */
  action?: string;
  /** Exact object, or a prefix ending in ':', e.g. 'model:' */
  object?: string;
  /** Only records with seq > afterSeq (paging). */
  afterSeq?: number;
  /** Default 200, at most 10 000 for list(); export ignores it. */
  limit?: number;
  /** Newest first when true (default false: oldest first). */
  descending?: boolean;
}

export type AuditVerifyResult =
  | {
      ok: true;
      count: number;
      headSeq: number;
      headHash: string;
      /** `SEQ:HASH` of the head, to keep outside the server. */
      anchor?: string;
      /**
       * True when the trail holds no record (and the database no user): nothing was verified, so
       * this is no evidence of an intact trail; `note` says so in words.
       */
      empty?: true;
      note?: string;
    }
  | {
      ok: false;
      count: number;
      /** seq of the first broken record (for a deleted record: the seq that is missing). */
      brokenSeq: number;
      /** Plain words: what is wrong at that record. */
      problem: string;
    };

/**
 * A chain head kept outside the database: record `seq` had hash `hash`. Printed on batch reports,
 * sent over the signal channels, shown by `audit verify`; written `SEQ:HASH` (64 hex digits).
 */
export interface AuditAnchor {
  seq: number;
  hash: string;
}

export interface AuditTrail {
  /**
   * Append one record. With `uow`, inside the caller's unit of work, so that a state change and its
   * audit record commit together (or neither does); without, in a unit of its own.
   */
  record(entry: AuditEntry, uow?: UnitOfWork): Promise<AuditRecord>;
  /**
   * Walk the chain from the first record and name the first broken one; with anchors, also check
   * that each anchored record is still there with the anchored hash (a trail cut back or rewritten
   * as a whole no longer matches a head kept outside the database).
   */
  verify(anchors?: AuditAnchor[]): Promise<AuditVerifyResult>;
  /** The current chain head as an anchor (null while the trail is empty). */
  anchor(): Promise<AuditAnchor | null>;
  list(filter?: AuditFilter): Promise<AuditRecord[]>;
  /** How many records match (limit, paging and order ignored). */
  count(filter?: AuditFilter): Promise<number>;
  /** Whole trail (or filtered) as CSV text (RFC 4180) or JSON text. */
  exportCsv(filter?: AuditFilter): Promise<string>;
  exportJson(filter?: AuditFilter): Promise<string>;
}
