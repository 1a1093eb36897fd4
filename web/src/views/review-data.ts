/** Pure helpers for Review: departure timeline, first exit from results, contribution averaging. */
import type { Alarm, BatchDetail } from '../../../core/api/rest.ts';
import type { Contributions, MonitorResult } from '../../../core/monitor/types.ts';

export interface TimelineEvent {
  tMin: number;
  kind: 'start' | 'first-exit' | 'alarm' | 'alarm-cleared' | 'endpoint' | 'end';
  label: string;
}

/** First result outside the envelope or above a limit (what made the batch depart), or null. */
export function firstExit(results: MonitorResult[]): { result: MonitorResult; what: string } | null {
  for (const r of results) {
    const env = r.envelope.find((e) => e.status !== 'inside');
    if (env) return { result: r, what: `PC${env.pc} ${env.status} the envelope (${env.sd.toFixed(1)} sd)` };
    if (r.t2 > r.limits.t2) return { result: r, what: 'T² above its limit' };
    if (r.q > r.limits.q) return { result: r, what: 'Q above its limit' };
  }
  return null;
}

/**
 * The departure window: from the first exit to the last consecutive result still outside (allowing
 * gaps of up to `tolerance` results back inside). Returns seq bounds, or null.
 */
export function departureWindow(results: MonitorResult[], tolerance = 3): { fromSeq: number; toSeq: number } | null {
  const out = (r: MonitorResult) => r.envelope.some((e) => e.status !== 'inside') || r.t2 > r.limits.t2 || r.q > r.limits.q;
  const i0 = results.findIndex(out);
  if (i0 < 0) return null;
  let last = i0;
  let inside = 0;
  for (let i = i0 + 1; i < results.length; i++) {
    if (out(results[i])) {
      last = i;
      inside = 0;
    } else if (++inside > tolerance) break;
  }
  return { fromSeq: results[i0].seq, toSeq: results[last].seq };
}

export function timeline(b: BatchDetail, results: MonitorResult[], alarms: Alarm[]): TimelineEvent[] {
  const m = (t: number) => (t - b.startedAt) / 60000;
  const ev: TimelineEvent[] = [{ tMin: 0, kind: 'start', label: 'batch start' }];
  const fe = firstExit(results);
  if (fe) ev.push({ tMin: fe.result.elapsedMin, kind: 'first-exit', label: `first exit: ${fe.what}` });
  for (const a of alarms) {
    ev.push({ tMin: m(a.raisedAt), kind: 'alarm', label: `alarm P${a.priority}: ${a.message}` });
    if (a.clearedAt !== null) ev.push({ tMin: m(a.clearedAt), kind: 'alarm-cleared', label: `alarm cleared (${a.key})` });
  }
  for (const e of b.endpointEvents) ev.push({ tMin: m(e.t), kind: 'endpoint', label: `endpoint ${e.from} → ${e.to}` });
  if (b.endedAt !== null) ev.push({ tMin: m(b.endedAt), kind: 'end', label: `batch end${b.endReason ? ` (${b.endReason})` : ''}` });
  return ev.sort((a, b2) => a.tMin - b2.tMin);
}

/** Mean of several contribution vectors (same axis) and of their region sums. */
export function meanContributions(list: Contributions[]): Contributions | null {
  if (list.length === 0) return null;
  const n = list.length;
  const first = list[0];
  const avg = (k: 't2' | 'q' | 'rbcT2' | 'rbcQ') => first[k].map((_, j) => list.reduce((a, c) => a + c[k][j], 0) / n);
  return {
    axis: first.axis,
    t2: avg('t2'),
    q: avg('q'),
    rbcT2: avg('rbcT2'),
    rbcQ: avg('rbcQ'),
    regions: first.regions.map((r, i) => ({ ...r, t2: list.reduce((a, c) => a + (c.regions[i]?.t2 ?? 0), 0) / n, q: list.reduce((a, c) => a + (c.regions[i]?.q ?? 0), 0) / n })),
  };
}

/** Up to `n` seqs spread over [fromSeq, toSeq] among those present in results. */
export function sampleSeqs(results: MonitorResult[], fromSeq: number, toSeq: number, n: number): number[] {
  const inWin = results.filter((r) => r.seq >= fromSeq && r.seq <= toSeq).map((r) => r.seq);
  if (inWin.length <= n) return inWin;
  return Array.from({ length: n }, (_, k) => inWin[Math.round((k * (inWin.length - 1)) / (n - 1))]);
}
