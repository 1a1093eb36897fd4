/**
 * Audit trail export: CSV (RFC 4180: comma, CRLF, fields with comma/quote/CR/LF quoted, quotes
 * doubled, UTF-8) and JSON. Values are exported exactly as stored, so the hash chain can be
 * recomputed from either file (docs/security.md). Spreadsheet users: cells are not escaped
 * against formula evaluation, because that would change the data; open the CSV as text.
 */
import type { AuditRecord, AuditVerifyResult } from './types.ts';

export const AUDIT_CSV_COLUMNS = ['seq', 'at', 'user', 'action', 'object', 'before', 'after', 'reason', 'prev_hash', 'hash'] as const;

function csvField(v: string | number | null): string {
  if (v === null) return '';
  const s = String(v);
  return /[",\r\n]/.test(s) ? '"' + s.replace(/"/g, '""') + '"' : s;
}

export function auditToCsv(records: AuditRecord[]): string {
  const lines = [AUDIT_CSV_COLUMNS.join(',')];
  for (const r of records) {
    lines.push(
      [r.seq, r.at, r.user, r.action, r.object, r.before, r.after, r.reason, r.prevHash, r.hash].map(csvField).join(','),
    );
  }
  return lines.join('\r\n') + '\r\n';
}

export interface AuditJsonExport {
  format: 'tideline-audit-export';
  version: 1;
  exportedAt: string;
  /** verify() of the whole trail at export time. */
  verify: AuditVerifyResult;
  records: AuditRecord[];
}

export function auditToJson(records: AuditRecord[], verify: AuditVerifyResult, exportedAt: string): string {
  const doc: AuditJsonExport = { format: 'tideline-audit-export', version: 1, exportedAt, verify, records };
  return JSON.stringify(doc, null, 1);
}
