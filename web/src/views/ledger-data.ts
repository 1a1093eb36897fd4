/** Pure helpers for the Ledger: query building from the filter form, and a short text of a change. */

import type { AuditRecord } from '../../../core/api/audit.ts';

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
