/** Pure helpers for Review: departure timeline, first exit from results, contribution averaging. */
import type { Alarm, BatchDetail, BatchSummary } from '../../../core/api/rest.ts';
import { endpointStateName } from '../../../core/vocabulary/plain-names.ts';
import { alarmTitle } from './alarm-data.ts';
import type { Contributions, MonitorResult } from '../../../core/monitor/types.ts';
import type { BatchComparison } from '../../../core/compare/compare-batch.ts';

/** GET /api/batches/:batch/comparison (server/transfer): the core comparison of a stored batch. */
export interface ComparisonResponse {
  batch: string;
  versionId: string;
  comparison: BatchComparison;
}

/** The batch's PC `pc` after DTW alignment, on the golden progress grid; null when absent. */
export function alignedLine(c: BatchComparison, pc: number): { x: number[]; y: number[] } | null {
  const p = c.aligned.pcs.find((x) => x.pc === pc);
  if (!p || p.score.length !== c.aligned.grid.length) return null;
  return { x: c.aligned.grid, y: p.score };
}

/** The comparison's departure window (spectrum indices) as seqs of the stored results. */
export function comparisonWindow(c: BatchComparison, results: MonitorResult[]): { fromSeq: number; toSeq: number } | null {
  const w = c.departureWindow;
  if (!w || results.length === 0) return null;
  const a = results[Math.min(Math.max(0, w.from), results.length - 1)];
  const b = results[Math.min(Math.max(0, w.to), results.length - 1)];
  return { fromSeq: a.seq, toSeq: b.seq };
}

export interface TimelineEvent {
  tMin: number;
  kind: 'start' | 'first-exit' | 'alarm' | 'alarm-cleared' | 'endpoint' | 'end';
  label: string;
}

/** A judged envelope check outside its band ('unjudged' points are neither in nor out). */
function outsideEnvelope(e: MonitorResult['envelope'][number]): boolean {
  return e.status === 'above' || e.status === 'below';
}

/** First result outside the envelope or above a limit (what made the batch depart), or null. */
export function firstExit(results: MonitorResult[]): { result: MonitorResult; what: string } | null {
  for (const r of results) {
    const env = r.envelope.find(outsideEnvelope);
    // Results stored before unjudged points were named may carry sd null (an infinite z).
    if (env) return { result: r, what: `PC${env.pc} ${env.status} the envelope${env.sd !== null && Number.isFinite(env.sd) ? ` (${env.sd.toFixed(1)} sd)` : ''}` };
    if (r.t2 > r.limits.t2) return { result: r, what: 'T² above its limit' };
    if (r.q > r.limits.q) return { result: r, what: 'Q above its limit' };
  }
  return null;
}

/**
 * The departure window: the first run of results outside the envelope or above a limit that holds
 * at least `minPoints` such results (short returns inside of up to `tolerance` results are bridged),
 * from its first to its last result out. A lone outlier does not make a departure: returns seq
 * bounds, or null when no run is long enough (a good batch has single points out now and then).
 */
export function departureWindow(results: MonitorResult[], tolerance = 3, minPoints = 3): { fromSeq: number; toSeq: number } | null {
  const out = (r: MonitorResult) => r.envelope.some(outsideEnvelope) || r.t2 > r.limits.t2 || r.q > r.limits.q;
  const runs: { from: number; to: number; count: number }[] = [];
  let cur: { from: number; to: number; count: number } | null = null;
  let inside = 0;
  for (let i = 0; i < results.length; i++) {
    if (out(results[i])) {
      if (cur) {
        cur.to = i;
        cur.count++;
      } else cur = { from: i, to: i, count: 1 };
      inside = 0;
    } else if (cur && ++inside > tolerance) {
      runs.push(cur);
      cur = null;
    }
  }
  if (cur) runs.push(cur);
  const run = runs.find((r) => r.count >= minPoints);
  return run ? { fromSeq: results[run.from].seq, toSeq: results[run.to].seq } : null;
}

/**
 * Events of a batch on its own clock (minutes from start). Alarms and endpoint changes are placed
 * by the seq of the spectrum that caused them when that result is known (the server stamps them
 * with its own clock, which differs from the analyzer's for replayed or accelerated data).
 */
export function timeline(b: BatchDetail, results: MonitorResult[], alarms: Alarm[], cmp: BatchComparison | null = null): TimelineEvent[] {
  const bySeq = new Map(results.map((r) => [r.seq, r.elapsedMin]));
  const at = (seq: number | null, t: number) => (seq !== null && bySeq.has(seq) ? bySeq.get(seq)! : (t - b.startedAt) / 60000);
  const ev: TimelineEvent[] = [{ tMin: 0, kind: 'start', label: 'batch start' }];
  if (cmp) {
    // The comparison applies the alarm rule (on-delay): its first exit is the departure; a single
    // point outside before it is listed apart, as it may be a suspect scan.
    if (cmp.firstOutside && (!cmp.firstExit || cmp.firstOutside.index < cmp.firstExit.index))
      ev.push({ tMin: cmp.firstOutside.elapsedMin, kind: 'first-exit', label: `first single point outside: ${cmp.firstOutside.what}` });
    if (cmp.firstExit) ev.push({ tMin: cmp.firstExit.elapsedMin, kind: 'first-exit', label: `left the golden batches: ${cmp.firstExit.message}` });
  } else {
    const fe = firstExit(results);
    if (fe) ev.push({ tMin: fe.result.elapsedMin, kind: 'first-exit', label: `first exit: ${fe.what}` });
  }
  // An alarm's times on the batch's clock: the analyzer's time of the spectrum that raised (and
  // cleared) it where the server kept it; `seq` names the spectrum of the latest change only.
  const onClock = (t: number) => (t - b.startedAt) / 60000;
  for (const a of alarms) {
    const raised = a.raisedSpectrumT != null ? onClock(a.raisedSpectrumT) : a.clearedAt === null ? at(a.seq, a.raisedAt) : onClock(a.raisedAt);
    ev.push({ tMin: raised, kind: 'alarm', label: `alarm P${a.priority}: ${a.message}` });
    if (a.clearedAt !== null) {
      const cleared = a.spectrumT != null ? onClock(a.spectrumT) : at(a.seq, a.clearedAt);
      ev.push({ tMin: cleared, kind: 'alarm-cleared', label: `alarm cleared (${alarmTitle(a)})` });
    }
  }
  for (const e of b.endpointEvents) ev.push({ tMin: at(e.seq, e.t), kind: 'endpoint', label: e.to === 'held' ? `endpoint ${e.from === 'held' ? 'still held' : `${e.from} → held`}: ${e.reason}` : `endpoint ${e.from} → ${e.to}` });
  if (b.endedAt !== null) ev.push({ tMin: (b.endedAt - b.startedAt) / 60000, kind: 'end', label: `batch end${b.endReason ? ` (${b.endReason})` : ''}` });
  return ev.sort((a, b2) => a.tMin - b2.tMin);
}

/**
 * Shares of each region (0…1), adding up to 1 over the regions: of T² as the region's sum of |T²
 * contribution| over the whole axis's (T² contributions can be negative, and shares of their signed
 * sum run past ±100 %), of Q as its sum of e² over Q.
 */
export function regionShares(c: Contributions): { name: string; from: number; to: number; assignment: string; t2Share: number; qShare: number }[] {
  const abs = c.regions.reduce((a, r) => a + r.t2Abs, 0);
  const q = c.regions.reduce((a, r) => a + r.q, 0);
  return c.regions.map((r) => ({ name: r.name, from: r.from, to: r.to, assignment: r.assignment, t2Share: abs > 0 ? r.t2Abs / abs : NaN, qShare: q > 0 ? r.q / q : NaN }));
}

/**
 * The rows shown plus one row for every region not shown, so each share column adds up to 100 %
 * (rows whose shares, over all regions, add up to 1).
 */
export function withRemainder<R extends { name: string; t2Share: number; qShare: number }>(shown: R[], totalRegions?: number): (R | { name: string; from: null; to: null; assignment: string; t2Share: number; qShare: number })[] {
  const left = totalRegions === undefined ? null : totalRegions - shown.length;
  // rounding can leave ±1e-16
  const t2 = Math.max(0, 1 - shown.reduce((a, r) => a + (Number.isFinite(r.t2Share) ? r.t2Share : 0), 0));
  const q = Math.max(0, 1 - shown.reduce((a, r) => a + (Number.isFinite(r.qShare) ? r.qShare : 0), 0));
  if (left === 0 || (left === null && t2 < 5e-4 && q < 5e-4)) return shown;
  const name = left === null ? 'all other regions' : `${left} other region${left === 1 ? '' : 's'}`;
  return [...shown, { name, from: null, to: null, assignment: '', t2Share: t2, qShare: q }];
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
    regions: first.regions.map((r, i) => ({
      ...r,
      t2: list.reduce((a, c) => a + (c.regions[i]?.t2 ?? 0), 0) / n,
      q: list.reduce((a, c) => a + (c.regions[i]?.q ?? 0), 0) / n,
      t2Abs: list.reduce((a, c) => a + (c.regions[i]?.t2Abs ?? 0), 0) / n,
    })),
  };
}

/** Up to `n` seqs spread over [fromSeq, toSeq] among those present in results. */
export function sampleSeqs(results: MonitorResult[], fromSeq: number, toSeq: number, n: number): number[] {
  const inWin = results.filter((r) => r.seq >= fromSeq && r.seq <= toSeq).map((r) => r.seq);
  if (inWin.length <= n) return inWin;
  return Array.from({ length: n }, (_, k) => inWin[Math.round((k * (inWin.length - 1)) / (n - 1))]);
}

/**
 * A batch's endpoint as its record states it, in words that agree with the end: a batch that
 * ended before its endpoint was reached says "not reached", never "running".
 */
export function endpointRecordText(b: Pick<BatchSummary, 'status' | 'endpointState' | 'model'>): { text: string; tone: 'ok' | 'warn' | 'info' | 'muted'; reached: boolean } {
  if (b.endpointState === null) return { text: b.model ? 'no endpoint rule' : 'not judged by a model', tone: 'muted', reached: false };
  const reached = b.endpointState === 'done' || b.endpointState === 'signalled';
  if (reached) return { text: b.endpointState === 'signalled' ? 'endpoint reached and signalled' : 'endpoint reached', tone: 'ok', reached };
  if (b.status === 'ended') return { text: b.endpointState === 'held' ? 'endpoint not reached (held by a guard at the end)' : `endpoint not reached (${endpointStateName(b.endpointState)} at the end)`, tone: 'warn', reached };
  return { text: `endpoint ${endpointStateName(b.endpointState)}`, tone: 'info', reached };
}

/** "3 suspect scans" — single spectra beyond a limit that raised no alarm on their own; null when not counted. */
export function suspectScansText(n: number | null | undefined): string | null {
  if (n === undefined || n === null) return null;
  return n === 0 ? 'no suspect scans' : `${n} suspect scan${n === 1 ? '' : 's'}`;
}

/**
 * A batch's scan counts in words, as Floor, Review and the report give them: "17 suspect scans ·
 * 2 spectra not judged (too damaged)". The second part only when there are any; null when the
 * server did not count (a batch no model judged).
 */
export function scanCountsText(c: { suspectCount?: number | null; unjudgedCount?: number | null }): string | null {
  const s = suspectScansText(c.suspectCount);
  if (s === null) return null;
  const u = c.unjudgedCount ?? 0;
  return u > 0 ? `${s} · ${u} spectr${u === 1 ? 'um' : 'a'} not judged (too damaged)` : s;
}
