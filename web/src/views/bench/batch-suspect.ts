/**
 * Why a finished batch may not be a good batch, in words, from what its record says: alarms raised
 * while it ran, an endpoint not reached, an end reason other than a normal stop. The batch pickers
 * of the Model bench show these beside each batch so a faulty batch is not taken as good unawares.
 * Pure.
 */
import type { BatchSummary } from '../../../../core/api/rest.ts';
import { ENDPOINT_WORDS } from '../../format/status-words.ts';

type Summary = Pick<BatchSummary, 'alarmCount' | 'endpointState' | 'endReason' | 'model' | 'status'>;

/** End reasons (free text from the site's system) that say the batch did not run its normal course. */
const ABNORMAL_END = /abort|fault|fail|error|maximum|time ?out|stall|interrupt|emergency|trip|alarm|reject|scrap|rework/i;

export function suspectReasons(b: Summary): string[] {
  const out: string[] = [];
  if (b.alarmCount > 0) out.push(`${b.alarmCount} alarm${b.alarmCount === 1 ? '' : 's'} raised while it ran`);
  if (b.model !== null && b.endpointState !== null && b.endpointState !== 'done' && b.endpointState !== 'signalled')
    out.push(`endpoint not reached (${ENDPOINT_WORDS[b.endpointState]?.text ?? b.endpointState} at the end)`);
  if (b.endReason && ABNORMAL_END.test(b.endReason)) out.push(`ended: ${b.endReason}`);
  return out;
}

/** The endpoint as run, in words. */
export function endpointAsRun(b: Pick<BatchSummary, 'model' | 'endpointState' | 'endpointAt' | 'startedAt'>): string {
  if (b.model === null) return 'not judged';
  if (b.endpointAt !== null) return `reached at ${Math.round((b.endpointAt - b.startedAt) / 60000)} min`;
  return b.endpointState ? `${ENDPOINT_WORDS[b.endpointState]?.text ?? b.endpointState}, not reached` : 'not reached';
}
