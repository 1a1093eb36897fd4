/**
 * The server's deployment preview (GET /api/deployments/preview?unit=…&versionId=…) as the deploy
 * form shows it: whether the version fits the unit, what it replaces, what changes and the
 * warnings. Pure; unreadable parts are left out rather than guessed.
 */
export interface DeployPreviewView {
  unit: string;
  mismatches: { what: 'axis' | 'product' | 'kind' | string; text: string }[];
  replaces: { name: string; version: number } | null;
  changes: { what: string; before: string | null; after: string | null }[];
  warnings: string[];
  dropsEndpointProperty: boolean;
  needsEndpointLossConfirmation: boolean;
}

const rec = (v: unknown): Record<string, unknown> => (v && typeof v === 'object' ? (v as Record<string, unknown>) : {});
const strOrNull = (v: unknown): string | null => (typeof v === 'string' ? v : null);

export function deployPreviewOf(body: unknown): DeployPreviewView {
  const o = rec(body);
  const c = rec(o.comparison);
  const r = rec(c.replaces);
  return {
    unit: typeof o.unit === 'string' ? o.unit : '',
    mismatches: (Array.isArray(o.mismatches) ? o.mismatches : []).map(rec).filter((m) => typeof m.text === 'string').map((m) => ({ what: String(m.what ?? ''), text: m.text as string })),
    replaces: typeof r.name === 'string' && typeof r.version === 'number' ? { name: r.name, version: r.version } : null,
    changes: (Array.isArray(c.changes) ? c.changes : []).map(rec).filter((x) => typeof x.what === 'string').map((x) => ({ what: x.what as string, before: strOrNull(x.before), after: strOrNull(x.after) })),
    warnings: (Array.isArray(c.warnings) ? c.warnings : []).filter((w): w is string => typeof w === 'string'),
    dropsEndpointProperty: c.dropsEndpointProperty === true,
    needsEndpointLossConfirmation: o.needsEndpointLossConfirmation === true,
  };
}
