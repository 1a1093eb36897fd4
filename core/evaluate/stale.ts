/**
 * Stale-data check used by the evaluation to score a drop-out: the analyzer counts as stale once
 * no spectrum has arrived for `staleAfter` nominal intervals (common practice, no published source;
 * the server raises its 'stale' alarm by the same rule from the wall clock).
 * Returns, for a gap before spectrum i, the time at which the stale alarm would have been raised.
 */
export function staleAlarmTime(prevT: number, nextT: number, intervalMs: number, staleAfter: number): number | null {
  const at = prevT + staleAfter * intervalMs;
  return nextT > at ? at : null;
}
