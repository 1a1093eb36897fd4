/**
 * Floor tile texts that must agree with each other: progress along the golden course, time to the
 * endpoint (or why there is none: reached, due now, stalled) and which alarms stand. Pure.
 */
import { alarmTitle } from './alarm-data.ts';
import type { Alarm } from '../../../core/api/rest.ts';
import type { EndpointStatus } from '../../../core/monitor/types.ts';
import { eta, minutes, percent, withUnit } from '../format/number-format.ts';
import { PRIORITY_WORDS } from '../format/status-words.ts';

/** A pace alarm standing for the unit's open batch: the batch has stopped moving along the golden course. */
export function stallAlarm(alarms: Iterable<Alarm>, unit: string, batch: string | null): Alarm | null {
  for (const a of alarms) if (a.unit === unit && a.key === 'pace' && a.active && (batch === null || a.batch === batch)) return a;
  return null;
}

/**
 * Time to the endpoint in words. Reached and held states say so; a stalled batch (pace alarm
 * standing) gets no estimate, as the golden batches' pace does not apply; an estimate that has run
 * down to nothing while the endpoint is not reached says "due now" instead of "≈ 0 s (0 s – 0 s)".
 */
export function etaText(ep: Pick<EndpointStatus, 'state' | 'etaMin'> | null, stall: Alarm | null, suffix = ' to endpoint'): string | null {
  if (!ep) return null;
  if (ep.state === 'done' || ep.state === 'signalled') return 'endpoint reached';
  if (ep.state === 'held') return 'endpoint met, held by a guard';
  if (stall) return 'stalled: no estimate while the batch is not progressing (pace alarm)';
  const e = ep.etaMin;
  if (!e || !Number.isFinite(e.median)) return null;
  // under half a minute to go (and the spread as small): the estimate says nothing more than "now"
  if (e.high < 0.5) return ep.state === 'settling' ? 'criteria met, confirming' : 'due now by the golden batches, not yet reached';
  return `${eta(e)}${suffix}`;
}

/**
 * Progress along the golden course. The fraction stops at 100 % at the golden batches' end of
 * course; a batch there whose endpoint is not reached is said to be past it, not "100 %".
 * (The course fraction alone; Floor and Watch show {@link progressView}, which agrees with the ETA.)
 */
export function progressText(fraction: number | null | undefined, ep: Pick<EndpointStatus, 'state'> | null, elapsedMin: number | null | undefined): string {
  const reached = ep && (ep.state === 'done' || ep.state === 'signalled');
  const f = fraction ?? null;
  const head =
    f === null || !Number.isFinite(f)
      ? 'progress not judged'
      : f >= 0.995 && ep && !reached
        ? 'at the end of the golden course'
        : `${percent(Math.min(f, 1))} of golden course`;
  return `${head} · ${minutes(elapsedMin)} elapsed`;
}

/**
 * Progress as Floor and Watch show it, from the same estimate as the time to endpoint, so the two
 * cannot disagree: the share of the batch's expected time to its endpoint that has elapsed,
 * elapsed / (elapsed + ETA median). On a property axis (e.g. conversion, which creeps towards its
 * target) the course fraction says "93 %" while two hours remain; time says 33 %. The property
 * itself is shown against its endpoint threshold by {@link propertyProgressText}. A stalled batch
 * gets no share (nothing says when it will finish); a reached or held endpoint is the whole way;
 * without an ETA (no reference endpoints known) the golden-course fraction is given, named so.
 * `share` is null where no bar should be drawn.
 */
export function progressView(
  p: { progressFraction: number; elapsedMin: number } | null | undefined,
  ep: Pick<EndpointStatus, 'state' | 'etaMin'> | null,
  stall: Alarm | null,
): { text: string; share: number | null } {
  if (!p) return { text: 'progress not judged', share: null };
  const el = ` · ${minutes(p.elapsedMin)} elapsed`;
  if (ep && (ep.state === 'done' || ep.state === 'signalled')) return { text: `endpoint reached${el}`, share: 1 };
  if (ep && ep.state === 'held') return { text: `endpoint met, held by a guard${el}`, share: 1 };
  if (stall) return { text: `not progressing (pace alarm): no estimate${el}`, share: null };
  const e = ep?.etaMin;
  if (e && Number.isFinite(e.median) && e.median >= 0 && p.elapsedMin >= 0) {
    const share = p.elapsedMin + e.median > 0 ? p.elapsedMin / (p.elapsedMin + e.median) : 0;
    if (e.high < 0.5) return { text: `endpoint due now by the golden batches${el}`, share };
    return { text: `≈ ${percent(share)} of the expected time to endpoint${el}`, share };
  }
  return { text: progressText(p.progressFraction, ep, p.elapsedMin), share: Number.isFinite(p.progressFraction) ? Math.min(1, Math.max(0, p.progressFraction)) : null };
}

/**
 * The predicted property against its endpoint threshold, from the endpoint rule's property
 * criterion: "90.9 % · endpoint at ≥ 99.1 %". The direction follows from the criterion (met ⇔ the
 * value is past the threshold). Null without a property criterion or a prediction.
 */
export function propertyProgressText(pred: { value: number; unit: string } | null | undefined, ep: Pick<EndpointStatus, 'criteria'> | null): string | null {
  if (!pred || !Number.isFinite(pred.value)) return null;
  const c = ep?.criteria.find((x) => x.criterion === 'property' && x.value !== null && Number.isFinite(x.threshold));
  const value = withUnit(pred.value, pred.unit);
  if (!c) return value;
  const below = c.met === (c.value! <= c.threshold);
  return `${value} · endpoint at ${below ? '≤' : '≥'} ${withUnit(c.threshold, pred.unit)}`;
}

/** The name of an alarm on screens (one vocabulary, core/vocabulary/plain-names.ts). */
export { alarmTitle };

/** "1 active alarm: PC3 score (P3 medium)" — which alarms stand, highest priority first, at most three named. */
export function activeAlarmsText(alarms: Iterable<Alarm>, unit: string): string | null {
  const list = [...alarms].filter((a) => a.unit === unit && a.active).sort((x, y) => x.priority - y.priority || x.raisedAt - y.raisedAt);
  if (list.length === 0) return null;
  const named = list.slice(0, 3).map((a) => `${alarmTitle(a)} (${PRIORITY_WORDS[a.priority]})`);
  const more = list.length > 3 ? ` and ${list.length - 3} more` : '';
  return `${list.length} active alarm${list.length === 1 ? '' : 's'}: ${named.join(', ')}${more}`;
}
