/** Words and tones for states shown on the dashboard. Pure. */
import type { Alarm, UnitSummary } from '../../../core/api/rest.ts';
import type { EndpointHoldCode, EndpointState } from '../../../core/monitor/types.ts';
import type { StatusTone } from '../theme/palette.ts';

export const ENDPOINT_WORDS: Record<EndpointState, { text: string; tone: StatusTone; help: string }> = {
  running: { text: 'running', tone: 'info', help: 'endpoint criteria not yet met' },
  nearing: { text: 'nearing', tone: 'info', help: 'approaching the endpoint; time to endpoint estimated' },
  settling: { text: 'settling', tone: 'warn', help: 'criteria met; waiting for confirmation over consecutive spectra' },
  held: { text: 'held', tone: 'warn', help: 'endpoint rule met and confirmed, but not released: a guard stands (see its reasons)' },
  done: { text: 'done', tone: 'ok', help: 'endpoint confirmed' },
  signalled: { text: 'signalled', tone: 'ok', help: 'endpoint confirmed and sent to the control system' },
};

/** What holds a met and confirmed endpoint (state 'held'), in short words. */
export const HOLD_WORDS: Record<EndpointHoldCode, { label: string; help: string }> = {
  'min-elapsed': { label: 'before the minimum time', help: "the batch is younger than the rule's minimum time from the batch start" },
  alarm: { label: 'alarm standing', help: 'a confirmed T², Q, combined-index or envelope alarm stands' },
  extrapolating: { label: 'prediction outside calibration', help: "the property prediction's leverage or residual is beyond its limit" },
};

export const ALARM_STATE_WORDS: Record<Alarm['state'], { text: string; tone: StatusTone }> = {
  'active-unacknowledged': { text: 'active, not acknowledged', tone: 'alarm' },
  'active-acknowledged': { text: 'active, acknowledged', tone: 'warn' },
  'cleared-unacknowledged': { text: 'cleared, not acknowledged', tone: 'info' },
  normal: { text: 'normal', tone: 'muted' },
};

export function alarmWords(a: Alarm, now: number): { text: string; tone: StatusTone } {
  if (a.shelvedUntil !== null && a.shelvedUntil > now) return { text: 'shelved', tone: 'muted' };
  return ALARM_STATE_WORDS[a.state];
}

export const PRIORITY_WORDS: Record<1 | 2 | 3 | 4, string> = { 1: 'P1 urgent', 2: 'P2 high', 3: 'P3 medium', 4: 'P4 low' };

export const UNIT_STATUS_WORDS: Record<UnitSummary['status'], { text: string; tone: StatusTone }> = {
  idle: { text: 'idle', tone: 'muted' },
  running: { text: 'receiving data', tone: 'ok' },
  stale: { text: 'data stale', tone: 'warn' },
  offline: { text: 'analyzer offline', tone: 'alarm' },
};

/** Status of a statistic against its limit: words and tone. */
export function limitStatus(value: number | null | undefined, limit: number | null | undefined): { text: string; tone: StatusTone } {
  if (value === null || value === undefined || !Number.isFinite(value) || !limit || !Number.isFinite(limit)) return { text: 'no data', tone: 'muted' };
  if (value > limit) return { text: 'above limit', tone: 'alarm' };
  if (value > 0.8 * limit) return { text: 'near limit', tone: 'warn' };
  return { text: 'within limit', tone: 'ok' };
}
