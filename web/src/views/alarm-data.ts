/** Pure helpers for the alarm list: order (the running batch's alarms first) and times in words. */
import type { Alarm } from '../../../core/api/rest.ts';
import { sortAlarms } from '../live/live-state.ts';
import { clock, dateTime } from '../format/number-format.ts';

/**
 * The running batch's alarms first, then the unit's other alarms (earlier batches, none); within
 * each group by state (unacknowledged active first), priority, newest raised.
 */
export function orderAlarms(alarms: Iterable<Alarm>, currentBatch: string | null): Alarm[] {
  const sorted = sortAlarms(alarms);
  if (currentBatch === null) return sorted;
  return [...sorted.filter((a) => a.batch === currentBatch), ...sorted.filter((a) => a.batch !== currentBatch)];
}

/** A time of day, with the date when it is not the same day as `ref`. */
function when(t: number, ref: number): string {
  return new Date(t).toDateString() === new Date(ref).toDateString() ? clock(t) : dateTime(t);
}

/**
 * "raised 13:30:07 · spectrum 11:02:33 (#11579)": when the server received the change, beside the
 * analyzer's time of the spectrum behind it (they differ for buffered, replayed or accelerated data).
 */
export function alarmTimes(a: Alarm): string {
  const parts = [`raised ${clock(a.raisedAt)}${a.raisedSpectrumT != null ? ` (spectrum taken ${when(a.raisedSpectrumT, a.raisedAt)})` : ''}`];
  if (a.clearedAt !== null) parts.push(`cleared ${clock(a.clearedAt)}${a.spectrumT != null && a.seq !== null ? ` (spectrum taken ${when(a.spectrumT, a.clearedAt)}, #${a.seq})` : ''}`);
  else if (a.seq !== null) parts.push(`spectrum #${a.seq}`);
  return parts.join(' · ');
}
