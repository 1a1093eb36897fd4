/**
 * The access-control contract. Implementation: server/auth/auth-service.ts.
 *
 * Roles are ordered: viewer < operator < model-owner < administrator. A route guarded by
 * `requireRole('operator')` admits operators, model owners and administrators.
 *
 * Browser sessions live in an HTTP-only, SameSite=Strict cookie; every state-changing request
 * (POST/PUT/PATCH/DELETE) must also carry the session's CSRF token in the `x-csrf-token` header
 * (requireRole checks it).
 */
import type { IncomingMessage } from 'node:http';
import type { RequestHandler } from 'express';
import type { UnitOfWork } from '../storage/repositories.ts';

export const ROLES = ['viewer', 'operator', 'model-owner', 'administrator'] as const;
export type Role = (typeof ROLES)[number];

export function isRole(x: unknown): x is Role {
  return typeof x === 'string' && (ROLES as readonly string[]).includes(x);
}

/** True when `have` is `need` or above it. */
export function roleAtLeast(have: Role, need: Role): boolean {
  return ROLES.indexOf(have) >= ROLES.indexOf(need);
}

export const SESSION_COOKIE = 'tideline_session';
export const CSRF_COOKIE = 'tideline_csrf';
export const CSRF_HEADER = 'x-csrf-token';

export interface AuthUser {
  id: number;
  /** Unique login name. */
  name: string;
  /** Full name as printed on signatures. */
  fullName: string;
  role: Role;
}

declare global {
  // eslint-disable-next-line @typescript-eslint/no-namespace
  namespace Express {
    interface Request {
      /** Set by Auth.requireRole / Auth.identify when a valid session is present. */
      user?: import('./types.ts').AuthUser;
    }
  }
}

/** What an electronic signature means (21 CFR 11.50: the meaning is part of the signature). */
export const SIGNATURE_MEANINGS = ['approved', 'retired', 'deployed'] as const;
export type SignatureMeaning = (typeof SIGNATURE_MEANINGS)[number];

export interface SignatureRequest {
  /** The signer (req.user). */
  user: AuthUser;
  /** The password, re-entered for this signature. */
  password: string;
  meaning: SignatureMeaning;
  /** e.g. 'model' */
  objectType: string;
  /** e.g. the model version id */
  objectId: string;
  /** The content hash the signature is bound to (the model's sha256). */
  objectHash: string;
  /** Why; required, not blank. */
  reason: string;
  /**
   * An override the signer states and signs with this signature (e.g. approving a model version
   * whose endpoint rule reached done early on reference batches): stored in the signature record
   * and the audit entry beside the reason. Not blank when given.
   */
  override?: string;
  /** Client address, for throttling (req.ip). */
  address?: string;
  /** What the signer saw when signing (e.g. the approval evidence): kept in the signature's audit record, so it is hash-chained with it. */
  evidence?: Record<string, unknown>;
}

export interface SignatureRecord {
  id: number;
  userName: string;
  fullName: string;
  role: Role;
  meaning: SignatureMeaning;
  objectType: string;
  objectId: string;
  objectHash: string;
  reason: string;
  /** The override signed with it (SignatureRequest.override), or null. */
  override: string | null;
  /** UTC ISO time. */
  signedAt: string;
  /** seq of the audit record written with the signature. */
  auditSeq: number;
}

/** Thrown by sign(): wrong password, throttled, blank reason, disabled user. */
export class SignatureError extends Error {
  constructor(
    message: string,
    /** HTTP status to answer with: 400 bad input, 401 wrong password, 429 throttled. */
    readonly status: number,
  ) {
    super(message);
    this.name = 'SignatureError';
  }
}

export interface AnalyzerTokenInfo {
  id: string;
  analyzer: string;
  label: string;
  createdAt: string;
  createdBy: string;
  revokedAt: string | null;
  revokedBy: string | null;
  lastUsedAt: string | null;
}

export interface Auth {
  /** Express middleware: 401 without a valid session, 403 below `role` or without CSRF token on writes. Sets req.user. */
  requireRole(role: Role): RequestHandler;
  /** Express middleware: sets req.user when a valid session is present; never refuses. */
  identify(): RequestHandler;
  /** For WebSocket upgrades (/live): the user of the session cookie on this request, or null. */
  userFromRequest(req: IncomingMessage): Promise<AuthUser | null>;
  /** For /live sockets: close the socket (code 4401) once the session behind `req` ends. */
  closeWhenSessionEnds(req: IncomingMessage, ws: { close(code?: number, reason?: string): void; once(ev: 'close', fn: () => void): unknown }, everyMs?: number): Promise<void>;
  /** For the /ingest upgrade: the analyzer id the token belongs to, or null (unknown or revoked). */
  verifyAnalyzerToken(token: string): Promise<string | null>;
  /** Create an analyzer token; the plain token is returned once and stored only hashed. */
  createAnalyzerToken(analyzer: string, label: string, createdBy: string): Promise<{ id: string; token: string }>;
  listAnalyzerTokens(): Promise<AnalyzerTokenInfo[]>;
  /** Revoke a token; resolves once it is revoked and every listener (onAnalyzerTokenRevoked) has acted on it. */
  revokeAnalyzerToken(id: string, revokedBy: string): Promise<boolean>;
  /**
   * Called after a token of `analyzer` was revoked through this service (REST, or the CLI inside the
   * server's process): the ingest side closes that analyzer's open connections whose token no longer
   * verifies, before the revocation is answered.
   */
  onAnalyzerTokenRevoked(listener: (analyzer: string) => Promise<void> | void): void;
  /**
   * Electronic signature: checks the re-entered password, writes the signature and its audit
   * record, then runs `apply` (e.g. the state change approve/retire) in the same unit of work: if
   * `apply` throws, neither the signature, nor its audit record, nor the change is written.
   * A wrong password is audited and throws SignatureError(401).
   */
  sign<T = void>(req: SignatureRequest, apply?: (sig: SignatureRecord, uow: UnitOfWork) => Promise<T>): Promise<{ signature: SignatureRecord; result: T }>;
  /** Signatures on one object, oldest first — show them wherever the object is shown. */
  signaturesFor(objectType: string, objectId: string): Promise<SignatureRecord[]>;
}
