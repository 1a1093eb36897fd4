/**
 * Version page: the endpoint rule replayed leave-one-batch-out on the reference batches — per batch
 * its known endpoint and where it came from, where the rule reached done, and by how much early or late.
 */
import type { EndpointCheckRowView, EndpointCheckView, ReferenceEndpointView } from '../../../../core/api/rest.ts';
import { Badge } from '../../components/status.tsx';
import { fixed, sig } from '../../format/number-format.ts';
import type { StatusTone } from '../../theme/palette.ts';
import { plainText } from '../../../../core/vocabulary/plain-names.ts';

const VERDICT_TONE: Record<EndpointCheckRowView['verdict'], StatusTone> = { early: 'alarm', 'within bracket': 'ok', 'on time': 'ok', late: 'info', 'not reached': 'warn', 'no known endpoint': 'muted' };
const SOURCE_WORDS: Record<NonNullable<EndpointCheckRowView['knownSource']>, string> = { lab: 'lab values crossing the target', marked: 'marked', 'marked-last': 'marked: the last spectrum' };

/** Early batches first (most early first), then the rest in the order given. */
export function orderCheckRows(rows: EndpointCheckRowView[]): EndpointCheckRowView[] {
  const early = rows.filter((r) => r.verdict === 'early').sort((a, b) => (a.intervals ?? 0) - (b.intervals ?? 0));
  return [...early, ...rows.filter((r) => r.verdict !== 'early')];
}

/** "3 intervals (4.5 min) early", "on time", "2 intervals (3.0 min) late". */
export function offsetText(r: Pick<EndpointCheckRowView, 'intervals' | 'minutes'> & Partial<Pick<EndpointCheckRowView, 'knownIndex'>>): string {
  if (r.intervals === null || r.minutes === null) return '—';
  if (r.intervals === 0) return 'at the known endpoint';
  const n = Math.abs(r.intervals);
  // without a known endpoint, counted from the first spectrum after a lab value not yet past the target
  const atLeast = r.knownIndex === null ? 'at least ' : '';
  return `${atLeast}${n} interval${n === 1 ? '' : 's'} (${fixed(Math.abs(r.minutes), 1)} min) ${r.intervals < 0 ? 'early' : 'late'}`;
}

export function EndpointCheckPanel({ check, ends }: { check: EndpointCheckView | null; ends: ReferenceEndpointView[] }) {
  const detail = new Map(ends.map((e) => [e.batch, e.detail]));
  return (
    <div class="panel" data-testid="endpoint-check">
      <h3>Endpoint rule on the reference batches (leave one batch out)</h3>
      {!check ? (
        <p class="muted">This version was built before the endpoint check: how its rule fires on the reference batches is not known.</p>
      ) : (
        <>
          <p class="small">{plainText(check.method)}</p>
          <p data-testid="endpoint-check-summary">
            {check.early > 0 ? (
              <Badge tone="alarm">
                early on {check.early} batch{check.early === 1 ? '' : 'es'}, up to {check.earlyMaxIntervals} interval{check.earlyMaxIntervals === 1 ? '' : 's'} ({fixed(check.earlyMaxMinutes, 1)} min)
              </Badge>
            ) : (
              <Badge tone="ok">never early</Badge>
            )}{' '}
            {check.earlyWithinBracket > 0 &&
              `(${check.earlyWithinBracket} of them inside the lab bracket of the known endpoint: early against the placed endpoint, not provably before the true crossing) `}
            {check.withinBracketCount !== undefined && (
              <span data-testid="endpoint-check-within">
                {check.withinBracketCount} within the lab bracket (between the last lab value short of the target and the first past it: neither early nor late as far as the lab values can tell),{' '}
              </span>
            )}
            {check.onTime} on time, {check.late} late, {check.notReached} not reached, {check.noEndpoint} without a known endpoint
            {check.medianIntervals !== null && ` · median ${sig(check.medianIntervals)} interval${Math.abs(check.medianIntervals) === 1 ? '' : 's'} from the known endpoint`}
          </p>
          <table class="batch-table" data-testid="endpoint-check-table">
            <thead>
              <tr>
                <th scope="col">batch</th>
                <th scope="col" class="num">known endpoint (min)</th>
                <th scope="col">from</th>
                <th scope="col" class="num">rule reached done (min)</th>
                <th scope="col">difference</th>
                <th scope="col" class="num">predicted property then</th>
                <th scope="col">verdict</th>
              </tr>
            </thead>
            <tbody>
              {orderCheckRows(check.rows).map((r) => (
                <tr key={r.batch} class={r.verdict === 'early' ? 'row-alarm' : ''} data-testid={`check-${r.batch}`}>
                  <td>{r.batch}</td>
                  <td class="num">
                    {r.knownMin === null ? (r.notBefore ? <span title={r.notBefore.text}>none; not before {fixed(r.notBefore.min, 1)}</span> : '—') : fixed(r.knownMin, 1)}
                    {r.knownIndex !== null && <span class="muted small"> #{r.knownIndex}</span>}
                    {r.bracketMin && <span class="muted small"> (lab bracket {fixed(r.bracketMin[0], 1)}–{fixed(r.bracketMin[1], 1)})</span>}
                  </td>
                  <td class="small" title={detail.get(r.batch)}>
                    {r.knownSource ? SOURCE_WORDS[r.knownSource] : 'none'}
                  </td>
                  <td class="num">
                    {r.firedMin === null ? '—' : fixed(r.firedMin, 1)}
                    {r.firedIndex !== null && <span class="muted small"> #{r.firedIndex}</span>}
                  </td>
                  <td>{offsetText(r)}</td>
                  <td class="num">{r.propertyAtFire === null ? '—' : sig(r.propertyAtFire)}</td>
                  <td>
                    <Badge tone={VERDICT_TONE[r.verdict]}>{r.verdict}</Badge>
                    {r.withinBracket && r.verdict === 'early' && <span class="small muted"> inside the lab bracket</span>}
                    {r.verdict === 'early' && r.bracketMin && <span class="small muted"> at or before the lab bracket began ({fixed(r.bracketMin[0], 1)} min)</span>}
                    {r.verdict === 'early' && r.knownIndex === null && r.notBefore && <span class="small muted"> before its {r.notBefore.text}</span>}
                  </td>
                </tr>
              ))}
            </tbody>
          </table>
        </>
      )}
    </div>
  );
}
