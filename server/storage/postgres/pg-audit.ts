/**
 * The audit trail's tables on PostgreSQL (migrations/200-audit-trail.sql): append-only rows, a
 * one-row chain head, triggers that refuse UPDATE, DELETE and TRUNCATE.
 *
 * The chain is extended by read-last-then-append, so appends are serialized: inside a unit of work
 * `last()` (and `append()`) first take a transaction-level advisory lock, held until the unit
 * commits or rolls back. It serializes appenders on every connection and every Tideline instance on
 * the database; under READ COMMITTED the read after the lock sees the last committed record.
 */
import { auditFromRow, type AuditRow } from '../row-mappers.ts';
import type { AuditRecord } from '../../../core/api/audit.ts';
import type { AuditChainLink, AuditQuery, AuditRepository } from '../repositories.ts';
import type { Q } from './pg-types.ts';

/** The advisory lock key of the audit chain (an arbitrary constant: 'TDLA' in ASCII). */
export const AUDIT_LOCK = 0x54444c41;

function where(q: AuditQuery): { sql: string; args: (string | number)[] } {
  const conds: string[] = [];
  const args: (string | number)[] = [];
  const arg = (v: string | number) => {
    args.push(v);
    return `$${args.length}`;
  };
  if (q.from !== undefined) conds.push(`at >= ${arg(q.from)}`);
  if (q.to !== undefined) conds.push(`at < ${arg(q.to)}`);
  if (q.user) conds.push(`"user" = ${arg(q.user)}`);
  const prefixOrExact = (column: 'action' | 'object', value: string | undefined, prefixEnd: string) => {
    if (!value) return;
    // left(…, n) = value rather than LIKE: a prefix with % or _ in it stays a plain prefix.
    if (value.endsWith(prefixEnd)) conds.push(`left(${column}, ${arg(value.length)}) = ${arg(value)}`);
    else conds.push(`${column} = ${arg(value)}`);
  };
  prefixOrExact('action', q.action, '.');
  prefixOrExact('object', q.object, ':');
  if (q.afterSeq !== undefined) conds.push(`seq > ${arg(q.afterSeq)}`);
  return { sql: conds.length ? ' WHERE ' + conds.join(' AND ') : '', args };
}

export class PgAuditRepository implements AuditRepository {
  /** `inUnit`: this repository writes through a unit of work's transaction (appends allowed). */
  constructor(
    private readonly sql: Q,
    private readonly inUnit: boolean,
  ) {}

  private async lock(): Promise<void> {
    if (this.inUnit) await this.sql`SELECT pg_advisory_xact_lock(${AUDIT_LOCK})`;
  }

  async last(): Promise<AuditChainLink | null> {
    await this.lock();
    const [r] = await this.sql<AuditChainLink[]>`SELECT seq, hash FROM audit_trail ORDER BY seq DESC LIMIT 1`;
    return r ? { seq: r.seq, hash: r.hash } : null;
  }

  async hashAt(seq: number): Promise<string | null> {
    const [r] = await this.sql<{ hash: string }[]>`SELECT hash FROM audit_trail WHERE seq = ${seq}`;
    return r?.hash ?? null;
  }

  async head(): Promise<AuditChainLink | null> {
    const [r] = await this.sql<AuditChainLink[]>`SELECT seq, hash FROM audit_head WHERE id = 1`;
    return r ? { seq: r.seq, hash: r.hash } : null;
  }

  async append(r: AuditRecord): Promise<void> {
    if (!this.inUnit) throw new Error('an audit record is appended inside a unit of work (the chain head is read and moved under one lock)');
    await this.lock();
    await this.sql`INSERT INTO audit_trail (seq, at, "user", action, object, before, after, reason, prev_hash, hash)
      VALUES (${r.seq}, ${r.at}, ${r.user}, ${r.action}, ${r.object}, ${r.before}, ${r.after}, ${r.reason}, ${r.prevHash}, ${r.hash})`;
    await this.sql`INSERT INTO audit_head (id, seq, hash) VALUES (1, ${r.seq}, ${r.hash})
      ON CONFLICT (id) DO UPDATE SET seq = excluded.seq, hash = excluded.hash`;
  }

  async list(q: AuditQuery): Promise<AuditRecord[]> {
    const w = where(q);
    const args = [...w.args];
    const limit = q.limit === undefined ? '' : ` LIMIT $${args.push(q.limit)}`;
    const rows = await this.sql.unsafe<AuditRow[]>(`SELECT * FROM audit_trail${w.sql} ORDER BY seq ${q.descending ? 'DESC' : 'ASC'}${limit}`, args);
    return rows.map(auditFromRow);
  }

  async count(q: AuditQuery): Promise<number> {
    const w = where(q);
    const [r] = await this.sql.unsafe<{ n: number }[]>(`SELECT count(*) AS n FROM audit_trail${w.sql}`, w.args);
    return r!.n;
  }

  async *scan(pageSize = 1000): AsyncIterable<AuditRecord> {
    let after = 0;
    for (;;) {
      const rows = await this.sql<AuditRow[]>`SELECT * FROM audit_trail WHERE seq > ${after} ORDER BY seq LIMIT ${pageSize}`;
      for (const r of rows) yield auditFromRow(r);
      if (rows.length < pageSize) return;
      after = rows[rows.length - 1]!.seq;
    }
  }
}
