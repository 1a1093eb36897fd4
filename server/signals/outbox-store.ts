/**
 * Reading the outbox (written by the server core in the same transaction as the result that caused
 * each row) and keeping each channel's delivery bookkeeping (tables from migrations 100–199).
 *
 * Per channel and unit a cursor holds the last unit_seq delivered or dead-lettered; the next row to
 * deliver is the first one above it. A row that fails is retried (signal_attempt) until the
 * channel's maximum attempts, then moved to signal_dead_letter and the cursor moves on.
 */
import type Database from 'better-sqlite3';

export interface OutboxRow {
  id: string;
  unit: string;
  unit_seq: number;
  type: string;
  payload: string;
  created_at: number;
}

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

export function envelopeOf(row: OutboxRow): SignalEnvelope {
  let payload: unknown;
  try {
    payload = JSON.parse(row.payload);
  } catch {
    payload = { unparsed: row.payload };
  }
  return { id: row.id, unit: row.unit, seq: row.unit_seq, type: row.type, createdAt: row.created_at, payload };
}

export interface AttemptRow {
  channel: string;
  event_id: string;
  unit: string;
  unit_seq: number;
  attempts: number;
  next_at: number;
  last_error: string;
  last_at: number;
}

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

export class OutboxStore {
  private readonly sUnits;
  private readonly sNext;
  private readonly sCursor;
  private readonly sSetCursor;
  private readonly sAttempt;
  private readonly sUpsertAttempt;
  private readonly sDeleteAttempt;
  private readonly sDead;
  private readonly sDeadList;
  private readonly sDeadGet;
  private readonly sRequeue;
  private readonly sRequeued;
  private readonly sDeadDelivered;
  private readonly sRow;

  constructor(readonly db: Database.Database) {
    this.sUnits = db.prepare<[], { unit: string }>('SELECT DISTINCT unit FROM outbox ORDER BY unit');
    this.sNext = db.prepare<[string, number, number], OutboxRow>(
      'SELECT id, unit, unit_seq, type, payload, created_at FROM outbox WHERE unit = ? AND unit_seq > ? ORDER BY unit_seq LIMIT ?',
    );
    this.sRow = db.prepare<[string], OutboxRow>('SELECT id, unit, unit_seq, type, payload, created_at FROM outbox WHERE id = ?');
    this.sCursor = db.prepare<[string, string], { last_seq: number }>('SELECT last_seq FROM signal_cursor WHERE channel = ? AND unit = ?');
    this.sSetCursor = db.prepare(
      `INSERT INTO signal_cursor (channel, unit, last_seq, updated_at) VALUES (@channel, @unit, @seq, @now)
       ON CONFLICT (channel, unit) DO UPDATE SET last_seq = excluded.last_seq, updated_at = excluded.updated_at
       WHERE excluded.last_seq > signal_cursor.last_seq`,
    );
    this.sAttempt = db.prepare<[string, string], AttemptRow>('SELECT * FROM signal_attempt WHERE channel = ? AND event_id = ?');
    this.sUpsertAttempt = db.prepare(
      `INSERT INTO signal_attempt (channel, event_id, unit, unit_seq, attempts, next_at, last_error, last_at)
       VALUES (@channel, @event_id, @unit, @unit_seq, @attempts, @next_at, @last_error, @last_at)
       ON CONFLICT (channel, event_id) DO UPDATE SET attempts = excluded.attempts, next_at = excluded.next_at,
         last_error = excluded.last_error, last_at = excluded.last_at`,
    );
    this.sDeleteAttempt = db.prepare('DELETE FROM signal_attempt WHERE channel = ? AND event_id = ?');
    this.sDead = db.prepare(
      `INSERT OR REPLACE INTO signal_dead_letter (channel, event_id, unit, unit_seq, type, attempts, last_error, dead_at, requeued_at, delivered_at)
       VALUES (@channel, @event_id, @unit, @unit_seq, @type, @attempts, @last_error, @dead_at, NULL, NULL)`,
    );
    this.sDeadList = db.prepare<[{ channel: string | null; unit: string | null; limit: number; offset: number }], DeadLetterRow>(
      `SELECT * FROM signal_dead_letter WHERE (@channel IS NULL OR channel = @channel) AND (@unit IS NULL OR unit = @unit)
       ORDER BY dead_at DESC, unit, unit_seq LIMIT @limit OFFSET @offset`,
    );
    this.sDeadGet = db.prepare<[string, string], DeadLetterRow>('SELECT * FROM signal_dead_letter WHERE channel = ? AND event_id = ?');
    this.sRequeue = db.prepare('UPDATE signal_dead_letter SET requeued_at = ?, delivered_at = NULL WHERE channel = ? AND event_id = ?');
    this.sRequeued = db.prepare<[string], DeadLetterRow>(
      'SELECT * FROM signal_dead_letter WHERE channel = ? AND requeued_at IS NOT NULL AND delivered_at IS NULL ORDER BY unit, unit_seq',
    );
    this.sDeadDelivered = db.prepare('UPDATE signal_dead_letter SET delivered_at = ? WHERE channel = ? AND event_id = ?');
  }

  units(): string[] {
    return this.sUnits.all().map((r) => r.unit);
  }

  cursor(channel: string, unit: string): number {
    return this.sCursor.get(channel, unit)?.last_seq ?? 0;
  }

  /** Rows above the channel's cursor for one unit, in unit_seq order. */
  pending(channel: string, unit: string, limit = 100): OutboxRow[] {
    return this.sNext.all(unit, this.cursor(channel, unit), limit);
  }

  row(id: string): OutboxRow | undefined {
    return this.sRow.get(id);
  }

  /**
   * Register a channel the first time it runs. With `startAtEnd` a new channel's cursors are set to
   * the current end of the outbox, so it sends only events written from now on; a channel seen
   * before always resumes from its cursors. Returns true when the channel was new.
   */
  registerChannel(channel: string, now: number, startAtEnd: boolean): boolean {
    return this.db.transaction(() => {
      const known = this.db.prepare<[string], { channel: string }>('SELECT channel FROM signal_channel WHERE channel = ?').get(channel);
      if (known) return false;
      this.db.prepare('INSERT INTO signal_channel (channel, registered_at, started_at_end) VALUES (?, ?, ?)').run(channel, now, startAtEnd ? 1 : 0);
      if (startAtEnd) {
        for (const unit of this.units()) {
          const max = this.db.prepare<[string], { m: number | null }>('SELECT MAX(unit_seq) AS m FROM outbox WHERE unit = ?').get(unit)?.m ?? 0;
          this.sSetCursor.run({ channel, unit, seq: max, now });
        }
      }
      return true;
    })();
  }

  markDelivered(channel: string, row: OutboxRow, now: number): void {
    this.db.transaction(() => {
      this.sSetCursor.run({ channel, unit: row.unit, seq: row.unit_seq, now });
      this.sDeleteAttempt.run(channel, row.id);
    })();
  }

  attempt(channel: string, eventId: string): AttemptRow | undefined {
    return this.sAttempt.get(channel, eventId);
  }

  /** Record a failed attempt (attempts = failures so far, counting this one) and when to try next. */
  markFailed(channel: string, row: OutboxRow, error: string, now: number, nextAt: number, attempts: number): void {
    this.sUpsertAttempt.run({ channel, event_id: row.id, unit: row.unit, unit_seq: row.unit_seq, attempts, next_at: nextAt, last_error: error.slice(0, 500), last_at: now });
  }

  /** Give up on a row: dead-letter it and move the cursor past it, in one transaction. */
  markDead(channel: string, row: OutboxRow, error: string, now: number, attempts: number): void {
    this.db.transaction(() => {
      this.sDead.run({
        channel,
        event_id: row.id,
        unit: row.unit,
        unit_seq: row.unit_seq,
        type: row.type,
        attempts,
        last_error: error.slice(0, 500),
        dead_at: now,
      });
      this.sDeleteAttempt.run(channel, row.id);
      this.sSetCursor.run({ channel, unit: row.unit, seq: row.unit_seq, now });
    })();
  }

  deadLetters(filter: { channel?: string; unit?: string; limit?: number; offset?: number } = {}): DeadLetterRow[] {
    return this.sDeadList.all({ channel: filter.channel ?? null, unit: filter.unit ?? null, limit: filter.limit ?? 100, offset: filter.offset ?? 0 });
  }

  deadLetter(channel: string, eventId: string): DeadLetterRow | undefined {
    return this.sDeadGet.get(channel, eventId);
  }

  /** Ask the channel to try a dead-lettered row again (sent out of order, after its successors). */
  requeue(channel: string, eventId: string, now: number): boolean {
    return this.sRequeue.run(now, channel, eventId).changes > 0;
  }

  requeued(channel: string): DeadLetterRow[] {
    return this.sRequeued.all(channel);
  }

  markDeadDelivered(channel: string, eventId: string, now: number): void {
    this.sDeadDelivered.run(now, channel, eventId);
  }
}

/** Rows a channel has already passed (unit_seq ≤ its cursor), oldest first, at most `limit` of the newest. */
export function deliveredRows(store: OutboxStore, channel: string, unit: string, limit = 5000): OutboxRow[] {
  const upTo = store.cursor(channel, unit);
  return store.db
    .prepare<[string, number, number], OutboxRow>(
      'SELECT * FROM (SELECT id, unit, unit_seq, type, payload, created_at FROM outbox WHERE unit = ? AND unit_seq <= ? ORDER BY unit_seq DESC LIMIT ?) ORDER BY unit_seq',
    )
    .all(unit, upTo, limit);
}
