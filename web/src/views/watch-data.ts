/** Pure helpers for the Watch view: envelope bands per PC, chart data from the live series, axis labels. */
import type { Alarm, ModelEnvelopeView } from '../../../core/api/rest.ts';
import type { Band } from '../charts/envelope-band.ts';
import type { LimitLine } from '../charts/plugins.ts';
import type { LiveState } from '../live/live-state.ts';
import { MAX_PCS, scoreCol } from '../live/live-state.ts';
import { limitName } from '../format/number-format.ts';
import { STYLE } from '../theme/palette.ts';

/** The band of PC `pc` from the envelope view, or null when the model has none for it. */
export function scoreBand(env: ModelEnvelopeView | null, pc: number): Band | null {
  if (!env) return null;
  const s = env.scores.find((x) => x.pc === pc);
  if (!s || s.expected.length !== env.progress.length) return null;
  return { x: env.progress, mean: s.expected, lower: s.lower, upper: s.upper };
}

/** x-axis label of the envelope's progress axis. */
export function progressLabel(env: Pick<ModelEnvelopeView, 'progressKind' | 'progressUnit'> | null): string {
  if (!env || env.progressKind === 'time') return 'elapsed time (min)';
  return `batch progress (${env.progressUnit})`;
}

/** PCs the model has (from the envelope, else from the latest scores), capped at MAX_PCS. */
export function availablePcs(env: ModelEnvelopeView | null, latestScores: number[] | null): number[] {
  const n = env ? env.scores.length : (latestScores?.length ?? 0);
  return Array.from({ length: Math.min(n, MAX_PCS) }, (_, i) => i + 1);
}

/**
 * Named limit lines of T² or Q for the latest result's limits. Where per-progress-point limits are
 * drawn too, the constant line is the global limit (not the one in force), and is named so.
 */
export function statLines(s: LiveState, stat: 'T²' | 'Q'): LimitLine[] {
  const r = s.latest;
  if (!r) return [];
  const value = stat === 'T²' ? r.limits.t2 : r.limits.q;
  return [{ value, label: limitName(stat, r.limits.confidence, hasLocal(s, stat) ? 'global limit' : 'limit'), style: STYLE.limit }];
}

export function scoreData(s: LiveState, pc: number): [Float64Array, Float64Array] {
  return [s.series.view('progress'), s.series.view(scoreCol(pc))];
}

/** x, the statistic, then the local limit and the alarm limit series when drawn. */
export function statData(s: LiveState, stat: 'T²' | 'Q', withLocal: boolean, withAlarm = false): Float64Array[] {
  const x = s.series.view('elapsedMin');
  const y = s.series.view(stat === 'T²' ? 't2' : 'q');
  const out = [x, y];
  if (withLocal) out.push(s.series.view(stat === 'T²' ? 'localT2' : 'localQ'));
  if (withAlarm) out.push(s.series.view(stat === 'T²' ? 'alarmT2' : 'alarmQ'));
  return out;
}

function recentFinite(v: Float64Array): boolean {
  for (let i = v.length - 1; i >= 0 && i >= v.length - 50; i--) if (Number.isFinite(v[i])) return true;
  return false;
}

/** Whether any local limit values are present in the series. */
export function hasLocal(s: LiveState, stat: 'T²' | 'Q'): boolean {
  return recentFinite(s.series.view(stat === 'T²' ? 'localT2' : 'localQ'));
}

/**
 * Whether the alarm limits in the series are local (they change along the batch, as per-point
 * limits do) or one global value.
 */
export function alarmLimitScope(s: LiveState, stat: 'T²' | 'Q'): 'local' | 'global' {
  const v = s.series.view(stat === 'T²' ? 'alarmT2' : 'alarmQ');
  let lo = Infinity;
  let hi = -Infinity;
  for (let i = 0; i < v.length; i++) {
    const x = v[i]!;
    if (!Number.isFinite(x)) continue;
    if (x < lo) lo = x;
    if (x > hi) hi = x;
  }
  return hi > lo * (1 + 1e-9) ? 'local' : 'global';
}

/** Whether the model has alarm (action) limits above the drawn ones, present in the series. */
export function hasAlarmLimit(s: LiveState, stat: 'T²' | 'Q'): boolean {
  return recentFinite(s.series.view(stat === 'T²' ? 'alarmT2' : 'alarmQ'));
}

/** Golden path in the plane of PCs a and b (expected scores), or null. */
export function goldenPath(env: ModelEnvelopeView | null, a: number, b: number): [number[], number[]] | null {
  const sa = env?.scores.find((x) => x.pc === a);
  const sb = env?.scores.find((x) => x.pc === b);
  if (!sa || !sb) return null;
  return [sa.expected, sb.expected];
}

/**
 * Reference batches' paths in the plane. `scores` may be stored per PC (scores[pc-1][i]) or per
 * point (scores[i][pc-1]); the shape is told apart by comparing with `progress`.
 */
export function referencePaths(env: ModelEnvelopeView | null, a: number, b: number): [number[], number[]][] {
  if (!env) return [];
  const out: [number[], number[]][] = [];
  for (const r of env.references) {
    const n = r.progress.length;
    const perPoint = r.scores.length === n && n > 0 && (r.scores[0]?.length ?? 0) !== n;
    if (perPoint) {
      if ((r.scores[0]?.length ?? 0) < Math.max(a, b)) continue;
      out.push([r.scores.map((row) => row[a - 1]), r.scores.map((row) => row[b - 1])]);
    } else if (r.scores.length >= Math.max(a, b)) out.push([r.scores[a - 1], r.scores[b - 1]]);
  }
  return out;
}

/** PCs with an envelope alarm open (not back to normal) in the given batch. */
export function alarmedPcsOf(alarms: Alarm[], batch: string): number[] {
  const out = new Set<number>();
  for (const a of alarms) {
    const m = /^pc(\d+)$/.exec(a.key);
    if (m && a.kind === 'envelope' && a.batch === batch && a.state !== 'normal') out.add(Number(m[1]));
  }
  return [...out].sort((x, y) => x - y);
}
