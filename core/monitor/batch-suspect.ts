/**
 * Why a finished batch may not be a good batch, from what its record says: alarms raised while it
 * ran, an endpoint not reached, an end reported as abnormal (maximum time, abort, fault, …). The
 * batch lists (GET /api/batches, BatchSummary.suspect) carry these reasons so a picker of reference
 * or held-out good batches can show them and a faulty batch is not taken as good unawares. Pure.
 */
import { endpointStateName } from '../vocabulary/plain-names.ts';

/** Reported end reasons (free text from the site's system) that say the batch did not run its normal course. */
const ABNORMAL_END = /abort|fault|fail|error|maximum|time ?out|stall|interrupt|emergency|trip|alarm|reject|scrap|rework|stopped by operator/i;

export interface BatchSuspectReason {
  /** 'alarms' | 'endpoint-not-reached' | 'abnormal-end' | 'open'. */
  code: 'alarms' | 'endpoint-not-reached' | 'abnormal-end' | 'open';
  text: string;
}

export function batchSuspectReasons(b: {
  status: 'open' | 'ended';
  alarmCount: number;
  /** Null when no model judged the batch. */
  endpointState: string | null;
  judged: boolean;
  /** The end reason as the analyzer reported it (verbatim). */
  reportedEndReason: string | null;
}): BatchSuspectReason[] {
  const out: BatchSuspectReason[] = [];
  if (b.status === 'open') out.push({ code: 'open', text: 'still running' });
  if (b.alarmCount > 0) out.push({ code: 'alarms', text: `${b.alarmCount} alarm${b.alarmCount === 1 ? '' : 's'} raised while it ran` });
  if (b.status === 'ended' && b.judged && b.endpointState !== null && b.endpointState !== 'done' && b.endpointState !== 'signalled') {
    out.push({ code: 'endpoint-not-reached', text: `endpoint not reached (${endpointStateName(b.endpointState)} at the end)` });
  }
  if (b.reportedEndReason && ABNORMAL_END.test(b.reportedEndReason)) out.push({ code: 'abnormal-end', text: `ended: ${b.reportedEndReason}` });
  return out;
}
