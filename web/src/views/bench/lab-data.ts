/**
 * The lab values the chosen reference batches carry (GET /api/batches/:batch/lab-values), summed up
 * per property for the property picker. A server without that route gives none, and the picker
 * takes the property's name as typed.
 */
import { get } from '../../api/http.ts';
import { ApiError } from '../../api/problem.ts';

export interface LabProperty {
  property: string;
  unit: string;
  values: number;
  batches: number;
}

interface LabRow {
  property: string;
  unit: string;
  superseded?: boolean;
  supersededBy?: string | null;
}

/** Rows of a lab-values answer: a page ({ items }) or a list. */
function rowsOf(body: unknown): LabRow[] {
  const items = Array.isArray(body) ? body : body && typeof body === 'object' && Array.isArray((body as { items?: unknown }).items) ? (body as { items: unknown[] }).items : [];
  return items.filter((r): r is LabRow => !!r && typeof (r as LabRow).property === 'string');
}

/** Properties with their unit, counted over the batches (values, batches with at least one). */
export function summariseLab(perBatch: unknown[]): LabProperty[] {
  const by = new Map<string, LabProperty & { seen: Set<number> }>();
  perBatch.forEach((body, b) => {
    for (const r of rowsOf(body)) {
      if (r.superseded || r.supersededBy) continue;
      const k = r.property;
      const e = by.get(k) ?? { property: k, unit: r.unit ?? '', values: 0, batches: 0, seen: new Set<number>() };
      e.values++;
      e.seen.add(b);
      by.set(k, e);
    }
  });
  return [...by.values()].map(({ seen, ...e }) => ({ ...e, batches: seen.size })).sort((a, b) => b.values - a.values);
}

/** null: this server has no lab-values route. */
export async function labOfBatches(batches: string[]): Promise<LabProperty[] | null> {
  try {
    const bodies = await Promise.all(batches.map((b) => get<unknown>(`/api/batches/${encodeURIComponent(b)}/lab-values`)));
    return summariseLab(bodies);
  } catch (e) {
    if (e instanceof ApiError && e.status === 404 && /no API route/.test(e.problem.detail ?? '')) return null;
    throw e;
  }
}
