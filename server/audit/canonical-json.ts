/**
 * Canonical JSON for audit before/after values: the value as JSON.stringify sees it (toJSON
 * honoured, undefined dropped, non-finite numbers become null), object keys sorted by UTF-16 code
 * units, no whitespace. Same value → same text, whatever the key order it was built with.
 */
export function canonicalJson(value: unknown): string {
  if (value === undefined) throw new Error('canonicalJson: undefined has no JSON form');
  const plain: unknown = JSON.parse(JSON.stringify(value));
  return write(plain);
}

function write(v: unknown): string {
  if (v === null || typeof v !== 'object') return JSON.stringify(v);
  if (Array.isArray(v)) return '[' + v.map(write).join(',') + ']';
  const o = v as Record<string, unknown>;
  const keys = Object.keys(o).sort();
  return '{' + keys.map((k) => JSON.stringify(k) + ':' + write(o[k])).join(',') + '}';
}
