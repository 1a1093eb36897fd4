/** Pure helpers for the alarm list: order (the running batch's alarms first) and times in words. */
import type { Alarm } from '../../../core/api/rest.ts';
import { sortAlarms } from '../live/live-state.ts';
import { clockOrDate } from '../format/number-format.ts';
import { ALARM_KIND_NAMES, alarmName } from '../../../core/vocabulary/plain-names.ts';

/**
 * An alarm's name as a person reads it ('PC3 score', 'Q (SPE)', 'pace', 'analyzer'): the key's
 * name where the vocabulary knows it, else its kind's; the codes stay in the API and exports.
 */
export function alarmTitle(a: Pick<Alarm, 'kind' | 'key'>): string {
  const byKey = alarmName(a.key);
  const known = byKey !== a.key.replace(/-/g, ' ');
  return known ? byKey : (ALARM_KIND_NAMES[a.kind] ?? byKey);
}

/**
 * The running batch's alarms first, then the unit's other alarms (earlier batches, none); within
 * each group by state (unacknowledged active first), priority, newest raised.
 */
export function orderAlarms(alarms: Iterable<Alarm>, currentBatch: string | null): Alarm[] {
  const sorted = sortAlarms(alarms);
  if (currentBatch === null) return sorted;
  return [...sorted.filter((a) => a.batch === currentBatch), ...sorted.filter((a) => a.batch !== currentBatch)];
}

const when = (t: number, ref: number) => clockOrDate(t, ref);

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
