/**
 * The repositories of the server's parts beside ingest (audit, signatures, access control), and
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
  readonly users: UserRepository;
  readonly sessions: SessionRepository;
  readonly loginFailures: LoginFailureRepository;
  readonly analyzerTokens: AnalyzerTokenRepository;
}

/** The access-control repositories, as Storage carries them. */
export interface AuthRepositories {
  readonly users: UserRepository;
  readonly sessions: SessionRepository;
  readonly loginFailures: LoginFailureRepository;
  readonly analyzerTokens: AnalyzerTokenRepository;
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

// ---- access control (server/auth) ------------------------------------------------------------

/** A stored user. Passwords only as scrypt hashes (server/auth/password.ts). */
export interface UserRow {
  id: number;
  name: string;
  full_name: string;
  role: string;
  password_hash: string;
  must_change_password: number;
  created_at: string;
  created_by: string;
  password_changed_at: string;
  disabled_at: string | null;
}

export interface NewUser {
  name: string;
  fullName: string;
  role: string;
  passwordHash: string;
  mustChange: boolean;
  createdBy: string;
  /** UTC ISO time. */
  at: string;
}

export interface UserRepository {
  /** By login name, case-insensitive. */
  byName(name: string): Promise<UserRow | null>;
  byId(id: number): Promise<UserRow | null>;
  /** Every user, by name. */
  list(): Promise<UserRow[]>;
  count(): Promise<number>;
  /** Throws when the name is taken. */
  insert(u: NewUser): Promise<UserRow>;
  setPassword(id: number, passwordHash: string, mustChange: boolean, at: string): Promise<void>;
  /** A rehash at a higher cost; not a password change. */
  replaceHash(id: number, passwordHash: string): Promise<void>;
  setRole(id: number, role: string): Promise<void>;
  setFullName(id: number, fullName: string): Promise<void>;
  setDisabled(id: number, at: string | null): Promise<void>;
  /** Administrators not disabled. */
  activeAdministrators(): Promise<number>;
}

/** A login session; only the SHA-256 of its token is stored. Times in ms since the epoch. */
export interface SessionRow {
  token_hash: string;
  user_id: number;
  csrf_token: string;
  created_at: number;
  last_seen_at: number;
  expires_at: number;
  address: string | null;
}

export interface SessionRepository {
  insert(s: SessionRow): Promise<void>;
  get(tokenHash: string): Promise<SessionRow | null>;
  touch(tokenHash: string, at: number): Promise<void>;
  delete(tokenHash: string): Promise<void>;
  /** Every session of a user except the one with `keepTokenHash`; returns how many ended. */
  deleteForUser(userId: number, keepTokenHash?: string): Promise<number>;
  /** Sessions expired by `now` or last seen at or before `idleBefore`; returns how many. */
  purge(now: number, idleBefore: number): Promise<number>;
}

/** Failed login attempts counted on one key (a user name or an address). Times in ms since the epoch. */
export interface LoginFailureRow {
  failures: number;
  lastFailureAt: number;
  lockedUntil: number;
}

export interface LoginFailureRepository {
  get(key: string): Promise<LoginFailureRow | null>;
  put(key: string, row: LoginFailureRow): Promise<void>;
  clear(key: string): Promise<void>;
}

/** An analyzer token of the access-control store (`tla_…`); times UTC ISO. */
export interface AnalyzerTokenRow {
  id: string;
  analyzer: string;
  label: string;
  tokenHash: string;
  createdAt: string;
  createdBy: string;
  revokedAt: string | null;
  revokedBy: string | null;
  lastUsedAt: string | null;
}

/** A token of the server core's own table (`tdl_…`, made with POST /api/analyzers); times ms since the epoch. */
export interface CoreAnalyzerTokenRow {
  id: number;
  analyzer: string;
  createdAt: number;
  revokedAt: number | null;
}

export interface AnalyzerTokenRepository {
  insert(t: Omit<AnalyzerTokenRow, 'revokedAt' | 'revokedBy' | 'lastUsedAt'>): Promise<void>;
  /** The token with this hash when not revoked. */
  findActive(tokenHash: string): Promise<AnalyzerTokenRow | null>;
  touch(id: string, at: string): Promise<void>;
  get(id: string): Promise<AnalyzerTokenRow | null>;
  /** Oldest first. */
  list(): Promise<AnalyzerTokenRow[]>;
  /** true when revoked now; false when unknown or revoked already. */
  revoke(id: string, at: string, by: string): Promise<boolean>;
  /** The server core's tokens, by id. */
  listCore(): Promise<CoreAnalyzerTokenRow[]>;
  /** true when revoked now; false when unknown or revoked already. */
  revokeCore(id: number, at: number): Promise<boolean>;
}
