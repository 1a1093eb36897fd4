/**
 * The repositories of the server's parts beside ingest (audit, signatures, access control), and
 * the unit of work that makes several of their writes one transaction.
 *
 * Every method returns a Promise so that a backend with a network round trip (PostgreSQL) can
 * implement the same contract; the embedded SQLite implementation answers synchronously inside.
 * test/server/storage-contract/ holds the suite any implementation must pass.
 */
import type { AuditRecord } from '../../core/api/audit.ts';
import type { MonitorResult } from '../../core/monitor/types.ts';
import type { SignatureRecord } from '../auth/types.ts';
import type { DeploymentRow } from './storage.ts';

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

/** State changes of a model version that are signed (run inside the signature's unit of work), and deployment. */
export interface ModelApprovalRepository {
  /** draft → approved; throws when the version is not a draft. */
  approve(id: string, by: string, at: number, reason: string): Promise<void>;
  /** → retired, ending its deployments; throws when it is retired already. */
  retire(id: string, by: string, at: number, reason: string): Promise<void>;
  /** Deploy a version on a unit, ending the unit's deployment before it. */
  deploy(d: DeploymentRow): Promise<void>;
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
  /** Shadow runs and periodic reviews; null on a backend that does not keep them (yet). */
  readonly modelLife: ModelLifeRepository | null;
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

/** An analyzer token (`tla_…`; tokens carried over from before migration 203 keep their `tdl_…` text and an id interim-<n>); times UTC ISO. */
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
}

// ---- signal delivery (server/signals) --------------------------------------------------------

/** An outbox row as the signal channels read it (written by the ingest commit). */
export interface SignalOutboxRow {
  id: string;
  unit: string;
  unit_seq: number;
  type: string;
  /** The payload as stored (JSON text). */
  payload: string;
  created_at: number;
}

/** Failed attempts of the row at the head of a channel's queue for one unit. */
export interface SignalAttemptRow {
  channel: string;
  event_id: string;
  unit: string;
  unit_seq: number;
  attempts: number;
  next_at: number;
  last_error: string;
  last_at: number;
}

/** A row a channel gave up on after its maximum attempts. */
export interface DeadLetterRow {
  channel: string;
  event_id: string;
  unit: string;
  unit_seq: number;
  type: string;
  attempts: number;
  last_error: string;
  dead_at: number;
  requeued_at: number | null;
  delivered_at: number | null;
}

/** The OPC UA "endpoint reached" latch of one unit (held until the control system acknowledges). */
export interface LatchRow {
  unit: string;
  batch: string | null;
  reached: number;
  reached_at: number | null;
  reason: string | null;
  event_id: string | null;
  acknowledged_at: number | null;
  acknowledged_by: string | null;
}

export interface EndpointLatchRepository {
  get(unit: string): Promise<LatchRow | null>;
  /** Every unit's latch. */
  all(): Promise<LatchRow[]>;
  /** Latch for this event; returns the latch, or null when this very event was latched before (a redelivery). */
  set(unit: string, batch: string | null, t: number, reason: string, eventId: string): Promise<LatchRow | null>;
  /** Reset a reached latch; returns it as it was, or null when there was nothing reached to acknowledge. */
  acknowledge(unit: string, by: string, at: number): Promise<LatchRow | null>;
}

/**
 * The outbox as the signal channels read it, and each channel's delivery bookkeeping: per channel
 * and unit a cursor (the last unit_seq delivered or dead-lettered), the failed attempts of the row
 * at the head, the dead letters, and the channels registered.
 */
export interface SignalRepository {
  /** Units that have outbox rows, by name. */
  units(): Promise<string[]>;
  /** The channel's cursor for a unit (0 before the first delivery). */
  cursor(channel: string, unit: string): Promise<number>;
  /** Rows above the channel's cursor for one unit, in unit_seq order. */
  pending(channel: string, unit: string, limit?: number): Promise<SignalOutboxRow[]>;
  /** Rows the channel has passed (unit_seq ≤ its cursor), oldest first, at most `limit` of the newest. */
  delivered(channel: string, unit: string, limit?: number): Promise<SignalOutboxRow[]>;
  row(id: string): Promise<SignalOutboxRow | null>;
  /**
   * Register a channel the first time it runs. With `startAtEnd` a new channel's cursors are set to
   * the current end of the outbox; a channel seen before resumes from its cursors. True when new.
   */
  registerChannel(channel: string, now: number, startAtEnd: boolean): Promise<boolean>;
  /** Move the cursor past the row and forget its failed attempts, together. */
  markDelivered(channel: string, row: SignalOutboxRow, now: number): Promise<void>;
  attempt(channel: string, eventId: string): Promise<SignalAttemptRow | null>;
  /** Record a failed attempt (attempts = failures so far, counting this one) and when to try next. */
  markFailed(channel: string, row: SignalOutboxRow, error: string, now: number, nextAt: number, attempts: number): Promise<void>;
  /** Give up on a row: dead-letter it and move the cursor past it, together. */
  markDead(channel: string, row: SignalOutboxRow, error: string, now: number, attempts: number): Promise<void>;
  /** Newest first. */
  deadLetters(filter?: { channel?: string; unit?: string; limit?: number; offset?: number }): Promise<DeadLetterRow[]>;
  deadLetter(channel: string, eventId: string): Promise<DeadLetterRow | null>;
  /** Ask the channel to try a dead-lettered row again; false when there is no such dead letter. */
  requeue(channel: string, eventId: string, now: number): Promise<boolean>;
  /** Requeued dead letters not yet delivered, in unit and seq order. */
  requeued(channel: string): Promise<DeadLetterRow[]>;
  markDeadDelivered(channel: string, eventId: string, now: number): Promise<void>;
  /** The OPC UA endpoint latches. */
  readonly latches: EndpointLatchRepository;
}

// ---- model life (server/model-life) ----------------------------------------------------------

/** A shadow run: a candidate version judging a unit's batches beside the deployed one (docs/model-life.md). */
export interface ShadowRunRow {
  id: string;
  unit: string;
  modelVersion: string;
  deployedVersion: string | null;
  startedAt: number;
  startedBy: string;
  reason: string | null;
  endedAt: number | null;
  endedBy: string | null;
  endReason: string | null;
}

/**
 * Shadow runs, the batches they judged and their results, the stored results of batches for the
 * health of a version, and the periodic-review due dates. The ingest commit writes shadow batches
 * and results itself (same transaction as the spectra).
 */
export interface ModelLifeRepository {
  insertRun(r: ShadowRunRow): Promise<void>;
  /** Ends the run; false when it had ended already. */
  endRun(id: string, at: number, by: string, reason: string): Promise<boolean>;
  getRun(id: string): Promise<ShadowRunRow | null>;
  /** The unit's run not ended, or null. */
  activeRun(unit: string): Promise<ShadowRunRow | null>;
  /** Newest first. */
  listRuns(f: { unit?: string; active?: boolean; versionId?: string }): Promise<ShadowRunRow[]>;
  /** Batches the run judged, oldest first, with the version that judged each for real. */
  runBatches(run: string): Promise<{ id: string; startT: number; status: string; modelVersion: string | null }[]>;
  batchCount(run: string): Promise<number>;
  /** The run's results on a batch, by spectrum index. */
  shadowResults(run: string, batch: string): Promise<{ idx: number; result: MonitorResult }[]>;
  /** Ended batches judged by a version, oldest first. */
  batchesJudgedBy(versionId: string): Promise<{ id: string; unit: string; startT: number }[]>;
  /** The stored results of a batch with their spectrum index. */
  results(batch: string): Promise<{ idx: number; result: MonitorResult }[]>;
  /** Set (or replace) the periodic-review due date of a version. */
  setReview(versionId: string, intervalDays: number, dueAt: number, at: number, by: string): Promise<void>;
  review(versionId: string): Promise<{ dueAt: number; intervalDays: number } | null>;
}

// ---- spectra read from worker threads (server/models/history-*) ------------------------------

/**
 * A serialisable reference to where the stored spectra are, for a worker thread to open its own
 * reader with (server/storage/spectrum-reader.ts). A backend adds its own kind.
 */
export type SpectrumSourceRef = { kind: 'sqlite'; file: string };

export interface SpectrumReader {
  /** A copy of the batch's first stored spectrum, or null when it has none. */
  first(batch: string): Promise<Float32Array | null>;
  /** The batch's spectra in index order, each copied into `into` (yielded; no allocation per spectrum); throws RangeError when one has another length. */
  spectra(batch: string, into: Float32Array): AsyncIterable<Float32Array>;
  close(): Promise<void>;
}
