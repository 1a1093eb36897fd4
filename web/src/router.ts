/** Hash routes of the dashboard. Pure: parse and format, no DOM. */

export type Route =
  | { view: 'floor' }
  | { view: 'watch'; unit: string }
  | { view: 'bench'; version: string | null }
  | { view: 'review'; batch: string | null; compare: string[] }
  | { view: 'ledger'; filter: Record<string, string> }
  | { view: 'not-found'; hash: string };

export const VIEW_TITLES: Record<Exclude<Route['view'], 'not-found'>, string> = {
  floor: 'Floor',
  watch: 'Watch',
  bench: 'Model bench',
  review: 'Review',
  ledger: 'Ledger',
};

function parseQuery(q: string): Record<string, string> {
  const out: Record<string, string> = {};
  for (const part of q.split('&')) {
    if (!part) continue;
    const [k, v = ''] = part.split('=');
    out[decodeURIComponent(k)] = decodeURIComponent(v.replace(/\+/g, ' '));
  }
  return out;
}

export function parseHash(hash: string): Route {
  const h = hash.replace(/^#/, '');
  const [path, q = ''] = h.split('?');
  const parts = path.split('/').filter(Boolean).map(decodeURIComponent);
  const query = parseQuery(q);
  const [head, arg] = parts;
  if (!head || head === 'floor') return parts.length <= 1 ? { view: 'floor' } : { view: 'not-found', hash };
  if (head === 'watch' && arg && parts.length === 2) return { view: 'watch', unit: arg };
  if (head === 'bench' && parts.length <= 2) return { view: 'bench', version: arg ?? null };
  if (head === 'review' && parts.length <= 2)
    return { view: 'review', batch: arg ?? null, compare: query.compare ? query.compare.split(',').filter(Boolean) : [] };
  if (head === 'ledger' && parts.length === 1) return { view: 'ledger', filter: query };
  return { view: 'not-found', hash };
}

export function href(r: Route): string {
  const e = encodeURIComponent;
  switch (r.view) {
    case 'floor':
      return '#/floor';
    case 'watch':
      return `#/watch/${e(r.unit)}`;
    case 'bench':
      return r.version ? `#/bench/${e(r.version)}` : '#/bench';
    case 'review':
      return `#/review${r.batch ? `/${e(r.batch)}` : ''}${r.compare.length ? `?compare=${r.compare.map(e).join(',')}` : ''}`;
    case 'ledger': {
      const q = Object.entries(r.filter)
        .filter(([, v]) => v)
        .map(([k, v]) => `${e(k)}=${e(v)}`)
        .join('&');
      return `#/ledger${q ? `?${q}` : ''}`;
    }
    case 'not-found':
      return r.hash;
  }
}
