/**
 * The "endpoint reached" latch per unit (table endpoint_latch): set once by the event that brought
 * the batch to 'done', held until the control system acknowledges it, kept across restarts.
 */
import type Database from 'better-sqlite3';

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

export class EndpointLatchStore {
  constructor(private readonly db: Database.Database) {}

  get(unit: string): LatchRow | undefined {
    return this.db.prepare<[string], LatchRow>('SELECT * FROM endpoint_latch WHERE unit = ?').get(unit);
  }

  /** Latch for this event; false when this very event was latched before (a redelivery). */
  set(unit: string, batch: string | null, t: number, reason: string, eventId: string): boolean {
    const prev = this.get(unit);
    if (prev?.event_id === eventId) return false;
    this.db
      .prepare(
        `INSERT INTO endpoint_latch (unit, batch, reached, reached_at, reason, event_id, acknowledged_at, acknowledged_by)
         VALUES (?, ?, 1, ?, ?, ?, NULL, NULL)
         ON CONFLICT (unit) DO UPDATE SET batch = excluded.batch, reached = 1, reached_at = excluded.reached_at,
           reason = excluded.reason, event_id = excluded.event_id, acknowledged_at = NULL, acknowledged_by = NULL`,
      )
      .run(unit, batch, t, reason, eventId);
    return true;
  }

  acknowledge(unit: string, by: string, at: number): LatchRow | undefined {
    const prev = this.get(unit);
    if (!prev || !prev.reached) return undefined;
    this.db.prepare('UPDATE endpoint_latch SET reached = 0, acknowledged_at = ?, acknowledged_by = ? WHERE unit = ?').run(at, by, unit);
    return prev;
  }
}
