/**
 * The audit trail's tables on SQLite (migrations/200-audit-trail.sql): append-only rows, a one-row
 * chain head, triggers that refuse UPDATE and DELETE.
 */
import type Database from 'better-sqlite3';
import { auditFromRow, type AuditRow } from './row-mappers.ts';
import type { AuditRecord } from '../../core/api/audit.ts';
import type { AuditChainLink, AuditQuery, AuditRepository } from './repositories.ts';

function where(q: AuditQuery): { sql: string; args: unknown[] } {
  const conds: string[] = [];
  const args: unknown[] = [];
  if (q.from !== undefined) {
    conds.push('at >= ?');
    args.push(q.from);
  }
  if (q.to !== undefined) {
    conds.push('at < ?');
    args.push(q.to);
  }
  if (q.user) {
    conds.push('user = ?');
    args.push(q.user);
  }
  const prefixOrExact = (column: 'action' | 'object', value: string | undefined, prefixEnd: string) => {
    if (!value) return;
    if (value.endsWith(prefixEnd)) {
      conds.push(`substr(${column}, 1, ?) = ?`);
      args.push(value.length, value);
    } else {
      conds.push(`${column} = ?`);
      args.push(value);
    }
  };
  prefixOrExact('action', q.action, '.');
  prefixOrExact('object', q.object, ':');
  if (q.afterSeq !== undefined) {
    conds.push('seq > ?');
    args.push(q.afterSeq);
  }
  return { sql: conds.length ? ' WHERE ' + conds.join(' AND ') : '', args };
}

export class SqliteAuditRepository implements AuditRepository {
  private readonly lastStmt;
  private readonly insertStmt;
  private readonly headStmt;
  private readonly readHeadStmt;
  private readonly pageStmt;
  private readonly hashStmt;

  constructor(private readonly db: Database.Database) {
    this.lastStmt = db.prepare<[], AuditChainLink>('SELECT seq, hash FROM audit_trail ORDER BY seq DESC LIMIT 1');
    this.insertStmt = db.prepare('INSERT INTO audit_trail (seq, at, user, action, object, before, after, reason, prev_hash, hash) VALUES (?,?,?,?,?,?,?,?,?,?)');
    this.headStmt = db.prepare('INSERT INTO audit_head (id, seq, hash) VALUES (1, ?, ?) ON CONFLICT(id) DO UPDATE SET seq = excluded.seq, hash = excluded.hash');
    this.readHeadStmt = db.prepare<[], AuditChainLink>('SELECT seq, hash FROM audit_head WHERE id = 1');
    this.hashStmt = db.prepare<[number], { hash: string }>('SELECT hash FROM audit_trail WHERE seq = ?');
    this.pageStmt = db.prepare<[number, number], AuditRow>('SELECT * FROM audit_trail WHERE seq > ? ORDER BY seq LIMIT ?');
  }

  async last(): Promise<AuditChainLink | null> {
    return this.lastStmt.get() ?? null;
  }

  async hashAt(seq: number): Promise<string | null> {
    return this.hashStmt.get(seq)?.hash ?? null;
  }

  async head(): Promise<AuditChainLink | null> {
    return this.readHeadStmt.get() ?? null;
  }

  async append(r: AuditRecord): Promise<void> {
    if (!this.db.inTransaction) throw new Error('an audit record is appended inside a unit of work (the chain head is read and moved under one lock)');
    this.insertStmt.run(r.seq, r.at, r.user, r.action, r.object, r.before, r.after, r.reason, r.prevHash, r.hash);
    this.headStmt.run(r.seq, r.hash);
  }

  async list(q: AuditQuery): Promise<AuditRecord[]> {
    const w = where(q);
    const limit = q.limit === undefined ? '' : ' LIMIT ?';
    const args = q.limit === undefined ? w.args : [...w.args, q.limit];
    return (this.db.prepare(`SELECT * FROM audit_trail${w.sql} ORDER BY seq ${q.descending ? 'DESC' : 'ASC'}${limit}`).all(...args) as AuditRow[]).map(auditFromRow);
  }

  async count(q: AuditQuery): Promise<number> {
    const w = where(q);
    return (this.db.prepare(`SELECT count(*) AS n FROM audit_trail${w.sql}`).get(...w.args) as { n: number }).n;
  }

  async *scan(pageSize = 1000): AsyncIterable<AuditRecord> {
    let after = 0;
    for (;;) {
      const rows = this.pageStmt.all(after, pageSize);
      for (const r of rows) yield auditFromRow(r);
      if (rows.length < pageSize) return;
      after = rows[rows.length - 1]!.seq;
    }
  }
}
