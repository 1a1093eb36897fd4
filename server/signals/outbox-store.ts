/**
 * What the signal channels send: an outbox row (written by the ingest commit in the same transaction
 * as the result that caused it) with its payload parsed. The rows and each channel's delivery
 * bookkeeping are read and kept through the storage's SignalRepository (server/storage/): per
 * channel and unit a cursor holds the last unit_seq delivered or dead-lettered; the next row to
 * deliver is the first one above it. A row that fails is retried until the channel's maximum
 * attempts, then dead-lettered and the cursor moves on.
 */
import type { SignalOutboxRow } from '../storage/repositories.ts';

export type { DeadLetterRow, SignalAttemptRow as AttemptRow, SignalOutboxRow as OutboxRow, SignalRepository } from '../storage/repositories.ts';

/** What every channel sends: the outbox row with its payload parsed. */
export interface SignalEnvelope {
  /** Event id (uuid): the receiver's idempotency key. */
  id: string;
  unit: string;
  /** Per-unit sequence, gap-free from the outbox: a receiver can spot a gap or a duplicate. */
  seq: number;
  type: string;
  createdAt: number;
  payload: unknown;
}

export function envelopeOf(row: SignalOutboxRow): SignalEnvelope {
  let payload: unknown;
  try {
    payload = JSON.parse(row.payload);
  } catch {
    payload = { unparsed: row.payload };
  }
  return { id: row.id, unit: row.unit, seq: row.unit_seq, type: row.type, createdAt: row.created_at, payload };
}
