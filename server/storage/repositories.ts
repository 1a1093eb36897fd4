/**
 * The repositories of the server's parts beside ingest (audit now; auth and signals join them), and
 * the unit of work that makes several of their writes one transaction.
 *
 * Every method returns a Promise so that a backend with a network round trip (PostgreSQL) can
 * implement the same contract; the embedded SQLite implementation answers synchronously inside.
 * test/server/storage-contract/ holds the suite any implementation must pass.
 */
import type { AuditRecord } from '../../core/api/audit.ts';
import type { SignatureRecord } from '../auth/types.ts';

/** A link of the audit chain: a record's seq and its hash. */
export interface AuditChainLink {
  seq: number;
  hash: string;
}

/**
 * Which audit records to read. `action` ending in '.' and `object` ending in ':' are prefixes
 * ('model.' matches every model action); any other value matches exactly. Times are ISO 8601 UTC
 * strings as stored (from inclusive, to exclusive).
 */
export interface AuditQuery {
  from?: string;
  to?: string;
  user?: string;
  action?: string;
  object?: string;
  /** Only records with seq > afterSeq. */
  afterSeq?: number;
  /** At most this many (none: all). */
  limit?: number;
  /** Newest first when true. */
  descending?: boolean;
}

/** The hash-chained audit trail as stored: append-only, records sealed by server/audit. */
export interface AuditRepository {
  /** The record with the highest seq, or null when the trail is empty. In a unit of work it is read under the unit's write lock. */
  last(): Promise<AuditChainLink | null>;
  /** The hash of record `seq`, or null when there is no such record. */
  hashAt(seq: number): Promise<string | null>;
  /** The stored chain head (moved by every append), or null before the first record. */
  head(): Promise<AuditChainLink | null>;
  /** Append a sealed record and move the chain head to it. Only inside a unit of work: refused outside one. */
  append(record: AuditRecord): Promise<void>;
  list(q: AuditQuery): Promise<AuditRecord[]>;
  count(q: AuditQuery): Promise<number>;
  /** Every record in seq order, read page by page. */
  scan(pageSize?: number): AsyncIterable<AuditRecord>;
}

/** A signature to store: the record without its id, and the signer's user id. */
export type NewSignature = Omit<SignatureRecord, 'id'> & { userId: number };

/** Electronic signatures (append-only), each linked to its audit record by auditSeq. */
export interface SignatureRepository {
  /** Store a signature; returns it with its id. Written in the unit of work of the change it signs. */
  insert(s: NewSignature): Promise<SignatureRecord>;
  /** Signatures on one object, oldest first. */
  forObject(objectType: string, objectId: string): Promise<SignatureRecord[]>;
  /** The latest signatures, newest first. */
  list(limit?: number): Promise<SignatureRecord[]>;
}

/** State changes of a model version that are signed (run inside the signature's unit of work). */
export interface ModelApprovalRepository {
  /** draft → approved; throws when the version is not a draft. */
  approve(id: string, by: string, at: number, reason: string): Promise<void>;
  /** → retired, ending its deployments; throws when it is retired already. */
  retire(id: string, by: string, at: number, reason: string): Promise<void>;
}

/** What one unit of work may write: every write made through it commits together or not at all. */
export interface UnitOfWork {
  readonly audit: AuditRepository;
  readonly signatures: SignatureRepository;
  readonly models: ModelApprovalRepository;
}

export interface UnitOfWorkRunner {
  /**
   * Run `work` as one transaction: when it resolves, everything written through `uow` is committed
   * (durably); when it throws, nothing is. Units of work run one after another. The work awaits
   * only the unit's own repositories (no other I/O): on SQLite the transaction holds the
   * database's write lock while it runs, and a unit that yields to the event loop is rolled back.
   */
  unitOfWork<T>(work: (uow: UnitOfWork) => Promise<T>): Promise<T>;
}
