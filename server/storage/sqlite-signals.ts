/**
 * The signal side's tables on SQLite (migrations 100–199): the channels' cursors, failed attempts,
 * dead letters and registrations, and the OPC UA endpoint latch; the outbox itself is read only
 * (the ingest commit writes it, migrations/001_initial.sql).
 */
import type Database from 'better-sqlite3';
import type { DeadLetterRow, EndpointLatchRepository, LatchRow, SignalAttemptRow, SignalOutboxRow, SignalRepository } from './repositories.ts';

const OUTBOX_COLUMNS = 'id, unit, unit_seq, type, payload, created_at';

export class SqliteEndpointLatches implements EndpointLatchRepository {
  private readonly sGet;
  private readonly sAll;
  private readonly sSet;
  private readonly sAck;

  constructor(private readonly db: Database.Database) {
    this.sGet = db.prepare<[string], LatchRow>('SELECT * FROM endpoint_latch WHERE unit = ?');
    this.sAll = db.prepare<[], LatchRow>('SELECT * FROM endpoint_latch ORDER BY unit');
    this.sSet = db.prepare(
      `INSERT INTO endpoint_latch (unit, batch, reached, reached_at, reason, event_id, acknowledged_at, acknowledged_by)
       VALUES (?, ?, 1, ?, ?, ?, NULL, NULL)
       ON CONFLICT (unit) DO UPDATE SET batch = excluded.batch, reached = 1, reached_at = excluded.reached_at,
         reason = excluded.reason, event_id = excluded.event_id, acknowledged_at = NULL, acknowledged_by = NULL`,
    );
    this.sAck = db.prepare('UPDATE endpoint_latch SET reached = 0, acknowledged_at = ?, acknowledged_by = ? WHERE unit = ?');
  }

  async get(unit: string): Promise<LatchRow | null> {
    return this.sGet.get(unit) ?? null;
  }

  async all(): Promise<LatchRow[]> {
    return this.sAll.all();
  }

  async set(unit: string, batch: string | null, t: number, reason: string, eventId: string): Promise<LatchRow | null> {
    return this.db.transaction(() => {
      if (this.sGet.get(unit)?.event_id === eventId) return null;
      this.sSet.run(unit, batch, t, reason, eventId);
      return this.sGet.get(unit) ?? null;
    })();
  }

  async acknowledge(unit: string, by: string, at: number): Promise<LatchRow | null> {
    return this.db.transaction(() => {
      const prev = this.sGet.get(unit);
      if (!prev || !prev.reached) return null;
      this.sAck.run(at, by, unit);
      return prev;
    })();
  }
}

export class SqliteSignalRepository implements SignalRepository {
  readonly latches: SqliteEndpointLatches;
  private readonly sUnits;
  private readonly sNext;
  private readonly sDelivered;
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
  private readonly sChannel;
  private readonly sInsertChannel;
  private readonly sMaxSeq;

  constructor(private readonly db: Database.Database) {
    this.latches = new SqliteEndpointLatches(db);
    this.sUnits = db.prepare<[], { unit: string }>('SELECT DISTINCT unit FROM outbox ORDER BY unit');
    this.sNext = db.prepare<[string, number, number], SignalOutboxRow>(`SELECT ${OUTBOX_COLUMNS} FROM outbox WHERE unit = ? AND unit_seq > ? ORDER BY unit_seq LIMIT ?`);
    this.sDelivered = db.prepare<[string, number, number], SignalOutboxRow>(
      `SELECT * FROM (SELECT ${OUTBOX_COLUMNS} FROM outbox WHERE unit = ? AND unit_seq <= ? ORDER BY unit_seq DESC LIMIT ?) ORDER BY unit_seq`,
    );
    this.sRow = db.prepare<[string], SignalOutboxRow>(`SELECT ${OUTBOX_COLUMNS} FROM outbox WHERE id = ?`);
    this.sCursor = db.prepare<[string, string], { last_seq: number }>('SELECT last_seq FROM signal_cursor WHERE channel = ? AND unit = ?');
    this.sSetCursor = db.prepare(
      `INSERT INTO signal_cursor (channel, unit, last_seq, updated_at) VALUES (@channel, @unit, @seq, @now)
       ON CONFLICT (channel, unit) DO UPDATE SET last_seq = excluded.last_seq, updated_at = excluded.updated_at
       WHERE excluded.last_seq > signal_cursor.last_seq`,
    );
    this.sAttempt = db.prepare<[string, string], SignalAttemptRow>('SELECT * FROM signal_attempt WHERE channel = ? AND event_id = ?');
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
    this.sChannel = db.prepare<[string], { channel: string }>('SELECT channel FROM signal_channel WHERE channel = ?');
    this.sInsertChannel = db.prepare('INSERT INTO signal_channel (channel, registered_at, started_at_end) VALUES (?, ?, ?)');
    this.sMaxSeq = db.prepare<[string], { m: number | null }>('SELECT MAX(unit_seq) AS m FROM outbox WHERE unit = ?');
  }

  async units(): Promise<string[]> {
    return this.sUnits.all().map((r) => r.unit);
  }

  private cursorNow(channel: string, unit: string): number {
    return this.sCursor.get(channel, unit)?.last_seq ?? 0;
  }

  async cursor(channel: string, unit: string): Promise<number> {
    return this.cursorNow(channel, unit);
  }

  async pending(channel: string, unit: string, limit = 100): Promise<SignalOutboxRow[]> {
    return this.sNext.all(unit, this.cursorNow(channel, unit), limit);
  }

  async delivered(channel: string, unit: string, limit = 5000): Promise<SignalOutboxRow[]> {
    return this.sDelivered.all(unit, this.cursorNow(channel, unit), limit);
  }

  async row(id: string): Promise<SignalOutboxRow | null> {
    return this.sRow.get(id) ?? null;
  }

  async registerChannel(channel: string, now: number, startAtEnd: boolean): Promise<boolean> {
    return this.db.transaction(() => {
      if (this.sChannel.get(channel)) return false;
      this.sInsertChannel.run(channel, now, startAtEnd ? 1 : 0);
      if (startAtEnd) {
        for (const { unit } of this.sUnits.all()) this.sSetCursor.run({ channel, unit, seq: this.sMaxSeq.get(unit)?.m ?? 0, now });
      }
      return true;
    })();
  }

  async markDelivered(channel: string, row: SignalOutboxRow, now: number): Promise<void> {
    this.db.transaction(() => {
      this.sSetCursor.run({ channel, unit: row.unit, seq: row.unit_seq, now });
      this.sDeleteAttempt.run(channel, row.id);
    })();
  }

  async attempt(channel: string, eventId: string): Promise<SignalAttemptRow | null> {
    return this.sAttempt.get(channel, eventId) ?? null;
  }

  async markFailed(channel: string, row: SignalOutboxRow, error: string, now: number, nextAt: number, attempts: number): Promise<void> {
    this.sUpsertAttempt.run({ channel, event_id: row.id, unit: row.unit, unit_seq: row.unit_seq, attempts, next_at: nextAt, last_error: error.slice(0, 500), last_at: now });
  }

  async markDead(channel: string, row: SignalOutboxRow, error: string, now: number, attempts: number): Promise<void> {
    this.db.transaction(() => {
      this.sDead.run({ channel, event_id: row.id, unit: row.unit, unit_seq: row.unit_seq, type: row.type, attempts, last_error: error.slice(0, 500), dead_at: now });
      this.sDeleteAttempt.run(channel, row.id);
      this.sSetCursor.run({ channel, unit: row.unit, seq: row.unit_seq, now });
    })();
  }

  async deadLetters(filter: { channel?: string; unit?: string; limit?: number; offset?: number } = {}): Promise<DeadLetterRow[]> {
    return this.sDeadList.all({ channel: filter.channel ?? null, unit: filter.unit ?? null, limit: filter.limit ?? 100, offset: filter.offset ?? 0 });
  }

  async deadLetter(channel: string, eventId: string): Promise<DeadLetterRow | null> {
    return this.sDeadGet.get(channel, eventId) ?? null;
  }

  async requeue(channel: string, eventId: string, now: number): Promise<boolean> {
    return this.sRequeue.run(now, channel, eventId).changes > 0;
  }

  async requeued(channel: string): Promise<DeadLetterRow[]> {
    return this.sRequeued.all(channel);
  }

  async markDeadDelivered(channel: string, eventId: string, now: number): Promise<void> {
    this.sDeadDelivered.run(now, channel, eventId);
  }
}
