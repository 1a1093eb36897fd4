/** The guards holding an endpoint (state 'held'), in words, with the caution. Used by Watch, Floor and Review. */
import type { EndpointHold } from '../../../core/monitor/types.ts';
import { Advisory, Badge } from '../components/status.tsx';
import { HOLD_WORDS } from '../format/status-words.ts';

export const HELD_CAUTION =
  "Held: the endpoint rule is met and confirmed, but Tideline does not call the endpoint while a guard stands; it is released only when every guard has cleared and the rule is still met. Tideline advises; the site's validated control strategy, interlocks and procedures decide.";

/** Short labels of the holds, e.g. 'alarm standing · before the minimum time' (one per code). */
export function holdLabels(holds: readonly EndpointHold[] | undefined): string {
  return [...new Set((holds ?? []).map((h) => HOLD_WORDS[h.code]?.label ?? h.code))].join(' · ');
}

export function EndpointHolds({ holds, caution = true }: { holds: readonly EndpointHold[] | undefined; caution?: boolean }) {
  const list = holds ?? [];
  return (
    <div class="holds" data-testid="endpoint-holds">
      <p class="holds-head">
        <b>Held — not an endpoint.</b> {list.length === 1 ? 'This guard stands' : `These ${list.length} guards stand`}:
      </p>
      <ul class="holds-list">
        {list.map((h, i) => (
          <li key={`${h.code}-${i}`} data-code={h.code}>
            <Badge tone="warn" title={HOLD_WORDS[h.code]?.help}>
              {HOLD_WORDS[h.code]?.label ?? h.code}
            </Badge>{' '}
            {h.text}
          </li>
        ))}
      </ul>
      {caution && <Advisory text={HELD_CAUTION} />}
    </div>
  );
}
