/**
 * One clock for what people read. Every process time Tideline shows is the analyzer's time of the
 * spectrum (or of the batch-start / batch-end entry), in one stated zone; the server's time of
 * receipt is shown beside it only where the two differ by more than RECEIVED_DIFFERS_MS. Times of
 * people's actions (acknowledged, signed, a report generated) are the server's clock, in the same
 * zone. Pure.
 */

/** The zone of every time in a report. */
export const REPORT_TIME_ZONE = 'UTC';

/**
 * The server's receipt time is shown beside the analyzer's time only where they differ by more than
 * this (60 s). Network transit and the group commit take milliseconds, and analyzer clocks kept by
 * NTP stay within about a second of the server: a difference beyond a minute means a clock out of
 * step, data buffered and sent late, or a replay (the demo) — worth a reader's notice. Common
 * practice, no published source.
 */
export const RECEIVED_DIFFERS_MS = 60_000;

/** "2026-12-05 13:47:36 UTC"; '—' for no time. */
export function formatReportTime(t: number | null | undefined): string {
  if (t === null || t === undefined || !Number.isFinite(t)) return '—';
  const d = new Date(t);
  if (Number.isNaN(d.getTime())) return '—';
  return d.toISOString().replace('T', ' ').replace(/\.\d+Z$/, ` ${REPORT_TIME_ZONE}`);
}

/** The receipt time to show beside a process time, or null when it does not differ meaningfully. */
export function receivedDiffers(processT: number | null | undefined, receivedT: number | null | undefined): number | null {
  if (processT === null || processT === undefined || receivedT === null || receivedT === undefined) return null;
  if (!Number.isFinite(processT) || !Number.isFinite(receivedT)) return null;
  return Math.abs(receivedT - processT) > RECEIVED_DIFFERS_MS ? receivedT : null;
}
