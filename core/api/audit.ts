/** The audit trail's record as `GET /api/audit` returns it (types only; server/audit writes it). */
export interface AuditRecord {
  /** 1, 2, 3, … without gaps. */
  seq: number;
  /** UTC time, ISO 8601 with milliseconds and 'Z', e.g. 2026-12-02T01:02:03.456Z. */
  at: string;
  user: string;
  action: string;
  object: string;
  /** Canonical JSON text (sorted keys, no whitespace) of `before`, or null. */
  before: string | null;
  after: string | null;
  reason: string | null;
  /** Hash of the previous record (64 zeros for the first). */
  prevHash: string;
  /** SHA-256 (hex) over the canonical serialization of this record including prevHash. */
  hash: string;
}
