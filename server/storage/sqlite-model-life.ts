/**
 * The model-life tables on SQLite (migration 007): shadow runs, the batches they judged and their
 * results, and the periodic-review due date of approved versions; the ingest commit writes shadow
 * batches and results itself (same transaction as the spectra).
 */
import type Database from 'better-sqlite3';
import type { MonitorResult } from '../../core/monitor/types.ts';
import type { ModelLifeRepository, ShadowRunRow } from './repositories.ts';

type Row = Record<string, unknown>;

const runFromRow = (r: Row): ShadowRunRow => ({
  id: r.id as string, unit: r.unit as string, modelVersion: r.model_version as string, deployedVersion: (r.deployed_version as string | null) ?? null,
  startedAt: r.started_at as number, startedBy: r.started_by as string, reason: (r.reason as string | null) ?? null,
  endedAt: (r.ended_at as number | null) ?? null, endedBy: (r.ended_by as string | null) ?? null, endReason: (r.end_reason as string | null) ?? null,
});

export class SqliteModelLifeRepository implements ModelLifeRepository {
  constructor(private readonly db: Database.Database) {}

  async insertRun(r: ShadowRunRow): Promise<void> {
    this.db.prepare(`INSERT INTO shadow_runs (id, unit, model_version, deployed_version, started_at, started_by, reason) VALUES (?, ?, ?, ?, ?, ?, ?)`)
      .run(r.id, r.unit, r.modelVersion, r.deployedVersion, r.startedAt, r.startedBy, r.reason);
  }

  /** Ends the run; false when it had ended already. */
  async endRun(id: string, at: number, by: string, reason: string): Promise<boolean> {
    return this.db.prepare('UPDATE shadow_runs SET ended_at = ?, ended_by = ?, end_reason = ? WHERE id = ? AND ended_at IS NULL').run(at, by, reason, id).changes === 1;
  }

  async getRun(id: string): Promise<ShadowRunRow | null> {
    const r = this.db.prepare('SELECT * FROM shadow_runs WHERE id = ?').get(id) as Row | undefined;
    return r ? runFromRow(r) : null;
  }

  async activeRun(unit: string): Promise<ShadowRunRow | null> {
    const r = this.db.prepare('SELECT * FROM shadow_runs WHERE unit = ? AND ended_at IS NULL').get(unit) as Row | undefined;
    return r ? runFromRow(r) : null;
  }

  async listRuns(f: { unit?: string; active?: boolean; versionId?: string }): Promise<ShadowRunRow[]> {
    const where: string[] = [];
    const args: unknown[] = [];
    if (f.unit) (where.push('unit = ?'), args.push(f.unit));
    if (f.versionId) (where.push('model_version = ?'), args.push(f.versionId));
    if (f.active !== undefined) where.push(f.active ? 'ended_at IS NULL' : 'ended_at IS NOT NULL');
    return (this.db.prepare(`SELECT * FROM shadow_runs ${where.length ? `WHERE ${where.join(' AND ')}` : ''} ORDER BY started_at DESC, id`).all(...args) as Row[]).map(runFromRow);
  }

  /** Batches the run judged, oldest first, with the version that judged each for real. */
  async runBatches(run: string): Promise<{ id: string; startT: number; status: string; modelVersion: string | null }[]> {
    return (this.db.prepare(`SELECT b.id, b.start_t, b.status, b.model_version FROM shadow_batches s JOIN batches b ON b.id = s.batch WHERE s.run = ? ORDER BY b.start_t, b.id`).all(run) as Row[])
      .map((r) => ({ id: r.id as string, startT: r.start_t as number, status: r.status as string, modelVersion: (r.model_version as string | null) ?? null }));
  }

  async batchCount(run: string): Promise<number> {
    return (this.db.prepare('SELECT COUNT(*) AS n FROM shadow_batches WHERE run = ?').get(run) as Row).n as number;
  }

  /** The run's results on a batch, by spectrum index. */
  async shadowResults(run: string, batch: string): Promise<{ idx: number; result: MonitorResult }[]> {
    return (this.db.prepare('SELECT idx, body FROM shadow_results WHERE run = ? AND batch = ? ORDER BY idx').all(run, batch) as Row[])
      .map((r) => ({ idx: r.idx as number, result: JSON.parse(r.body as string) as MonitorResult }));
  }

  /** Ended batches judged by a version, oldest first. */
  async batchesJudgedBy(versionId: string): Promise<{ id: string; unit: string; startT: number }[]> {
    return (this.db.prepare(`SELECT id, unit, start_t FROM batches WHERE model_version = ? AND status = 'ended' ORDER BY start_t, id`).all(versionId) as Row[])
      .map((r) => ({ id: r.id as string, unit: r.unit as string, startT: r.start_t as number }));
  }

  /** The stored results of a batch with their spectrum index. */
  async results(batch: string): Promise<{ idx: number; result: MonitorResult }[]> {
    return (this.db.prepare('SELECT idx, body FROM results WHERE batch = ? ORDER BY idx').all(batch) as Row[])
      .map((r) => ({ idx: r.idx as number, result: JSON.parse(r.body as string) as MonitorResult }));
  }

  async setReview(versionId: string, intervalDays: number, dueAt: number, at: number, by: string): Promise<void> {
    this.db.prepare(`INSERT INTO model_reviews (model_version, interval_days, due_at, set_at, set_by) VALUES (?, ?, ?, ?, ?)
      ON CONFLICT (model_version) DO UPDATE SET interval_days = excluded.interval_days, due_at = excluded.due_at, set_at = excluded.set_at, set_by = excluded.set_by`)
      .run(versionId, intervalDays, dueAt, at, by);
  }

  async review(versionId: string): Promise<{ dueAt: number; intervalDays: number } | null> {
    const r = this.db.prepare('SELECT due_at, interval_days FROM model_reviews WHERE model_version = ?').get(versionId) as Row | undefined;
    return r ? { dueAt: r.due_at as number, intervalDays: r.interval_days as number } : null;
  }
}
