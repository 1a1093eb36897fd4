/** Pure helpers for the Ledger: query building from the filter form, and a short text of a change. */

import type { AuditRecord } from '../../../core/api/audit.ts';
import { alarmStateName } from '../../../core/vocabulary/plain-names.ts';

/** One audit record as /api/audit returns it. */
export type AuditRow = AuditRecord;

export interface LedgerFilter {
  user: string;
  action: string;
  object: string;
  /** datetime-local values (read in UTC, the zone the Ledger shows) or ISO strings. */
  from: string;
  to: string;
}

/** Query parameters for /api/audit: datetimes without a zone read as UTC, sent as ISO; newest first. */
export function ledgerQuery(f: LedgerFilter, limit: number | undefined): Record<string, string | number | undefined> {
  const iso = (v: string) => {
    if (!v) return undefined;
    const d = new Date(/^\d{4}-\d\d-\d\dT\d\d:\d\d(:\d\d(\.\d+)?)?$/.test(v.trim()) ? `${v.trim()}Z` : v);
    return Number.isNaN(d.getTime()) ? v : d.toISOString();
  };
  return { user: f.user || undefined, action: f.action || undefined, object: f.object || undefined, from: iso(f.from), to: iso(f.to), limit, order: 'desc' };
}

/**
 * "status: draft → approved; deployedTo: [] → [dryer-1]" for flat objects; for other JSON, the
 * after value shortened. Keys unchanged between before and after are left out.
 */
export function summariseChange(before: string | null, after: string | null, max = 160): string {
  const parse = (s: string | null): unknown => {
    if (s === null) return undefined;
    try {
      return JSON.parse(s);
    } catch {
      return s;
    }
  };
  const b = parse(before);
  const a = parse(after);
  const short = (v: unknown) => {
    const s = typeof v === 'string' ? v : JSON.stringify(v);
    return s.length > 40 ? `${s.slice(0, 39)}…` : s;
  };
  const isObj = (v: unknown): v is Record<string, unknown> => typeof v === 'object' && v !== null && !Array.isArray(v);
  let out: string;
  if (isObj(a) && (isObj(b) || b === undefined)) {
    const keys = [...new Set([...Object.keys(b ?? {}), ...Object.keys(a)])].sort();
    const parts = keys
      .filter((k) => JSON.stringify((b ?? {})[k]) !== JSON.stringify(a[k]))
      .map((k) => (b === undefined || !(k in b) ? `${k}: ${short(a[k])}` : `${k}: ${short(b[k])} → ${k in a ? short(a[k]) : '(removed)'}`));
    out = parts.join('; ');
  } else if (a !== undefined && b !== undefined) out = `${short(b)} → ${short(a)}`;
  else if (a !== undefined) out = short(a);
  else if (b !== undefined) out = `removed ${short(b)}`;
  else out = '';
  return out.length > max ? `${out.slice(0, max - 1)}…` : out;
}

/**
 * A group acknowledgement (action `alarm.acknowledge-group`) in words, every alarm it covers named:
 * "3 alarms acknowledged in one action: Hotelling T² (P1, batch B-7: unacknowledged, returned to
 * normal → normal); …". Null when `after` is not such a record.
 */
export function groupAcknowledgeText(after: string | null): { head: string; items: string[] } | null {
  let a: unknown;
  try {
    a = after === null ? null : JSON.parse(after);
  } catch {
    return null;
  }
  if (typeof a !== 'object' || a === null || !Array.isArray((a as { alarms?: unknown }).alarms)) return null;
  const list = (a as { alarms: { id: string; name?: string; priority?: number; batch?: string | null; from?: string; to?: string }[] }).alarms;
  return {
    head: `${list.length} alarm${list.length === 1 ? '' : 's'} acknowledged in one action:`,
    items: list.map((x) => `${x.name ?? x.id}${x.priority ? ` (P${x.priority})` : ''}${x.batch ? `, batch ${x.batch}` : ''}: ${alarmStateName(x.from ?? '?')} → ${alarmStateName(x.to ?? '?')} · alarm ${x.id.slice(0, 8)}`),
  };
}
