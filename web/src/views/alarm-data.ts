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

/** A time of day with seconds, the date before it when it is not the same day as `ref`. */
function when(t: number, ref: number): string {
  return new Date(t).toDateString() === new Date(ref).toDateString() ? clock(t) : `${dateTime(t).slice(0, 10)} ${clock(t)}`;
}

/** Beyond this the server's time of receipt is worth showing beside the spectrum's time. */
const RECEIPT_SHOWN_MS = 60_000;

/**
 * "raised: spectrum taken 11:02:33 (#11579) · received 13:30:07": one clock, the
 * analyzer's time of the spectrum behind each change (docs/dashboard.md, "Time"); the server's time
 * of receipt only where it differs by more than a minute (buffered, replayed or accelerated data).
 * An alarm the server raises itself (stale data, analyzer status) has no spectrum: its time is the
 * server's.
 */
export function alarmTimes(a: Alarm, now: number = a.clearedAt ?? a.raisedAt): string {
  const received = (spectrumT: number, at: number) => (Math.abs(at - spectrumT) > RECEIPT_SHOWN_MS ? ` · received ${when(at, now)}` : '');
  if (a.raisedSpectrumT == null) {
    const parts = [`raised ${when(a.raisedAt, now)}`];
    if (a.clearedAt !== null) parts.push(`cleared ${when(a.clearedAt, now)}`);
    return parts.join(' · ');
  }
  const sameSpectrum = a.clearedAt === null && a.seq !== null && (a.spectrumT == null || a.spectrumT === a.raisedSpectrumT);
  const parts = [`raised: spectrum taken ${when(a.raisedSpectrumT, now)}${sameSpectrum ? ` (#${a.seq})` : ''}${received(a.raisedSpectrumT, a.raisedAt)}`];
  const latest = a.clearedAt !== null ? 'cleared' : 'latest change';
  if (!sameSpectrum && a.seq !== null && a.spectrumT != null) parts.push(`${latest}: spectrum #${a.seq} taken ${when(a.spectrumT, now)}${a.clearedAt !== null ? received(a.spectrumT, a.clearedAt) : ''}`);
  else if (a.clearedAt !== null) parts.push(`cleared ${when(a.clearedAt, now)}`);
  return parts.join(' · ');
}
