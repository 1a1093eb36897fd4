/**
 * The endpoint rule checked before approval: replayed leave-one-batch-out on the reference batches
 * through core's EndpointTracker (the state machine the live monitor uses), and compared with each
 * batch's known endpoint (core/model/reference-endpoints.ts).
 *
 * For each reference batch, as for a batch the model has not seen:
 * - refitted without the batch: the property predictions (the PLS calibrated without that batch's
 *   lab values, same LV count), and every automatic threshold (MBSD, plateau, golden end region,
 *   the minimum time: re-resolved from the other batches' known endpoints,
 *   core/model/endpoint-calibration.ts);
 * - not refitted: the preprocessing chains and the PCA (loadings from all reference batches: one
 *   batch in many moves them little, and refitting the PCA per batch would rotate and re-sign the
 *   scores the plateau and golden end criteria compare), the LV count, and the automatic property
 *   margin (RMSECV is itself cross-validated over batches).
 * Run-time holds (standing alarms, a prediction outside its calibration) are not replayed: they can
 * only delay a call, so a call early here may be later at run time, and one on time or late here
 * is not earlier there.
 *
 * Verdicts. A lab endpoint is known only to lie inside its lab bracket — after the last lab value
 * not yet past the target, at or before the first past it — and is placed late within it on purpose
 * (core/model/reference-endpoints.ts). A call inside the bracket is neither early nor late as far as
 * the lab values can tell: its verdict is 'within bracket'. Early is a call at or before the
 * bracket's start (the spectrum of the last lab value still short of the target: the lab said the
 * batch was not there yet); late a call after its end. Marked endpoints have no bracket: any call
 * before the mark is early, at it on time, after it late. Intervals and minutes are always counted
 * from the placed (or marked) endpoint, with the bracket beside them. Approval of a rule that is
 * early on a reference batch needs a signed override (the approval route).
 */
import { EndpointTracker, type EndpointInputs } from '../endpoint/endpoint-tracker.ts';
import { resolvedGuards, type EndpointRuleSpec, type ResolvedEndpointRule } from '../endpoint/spec.ts';
import { PlateauWindow } from '../endpoint/plateau.ts';
import { MovingBlockSd } from '../envelope/mbsd.ts';
import type { DomainEvent } from '../monitor/types.ts';
import { resolveCriteria, type CalibrationBatch, type EndValues, type PropertyContext } from './endpoint-calibration.ts';
import type { ReferenceEndpoint } from './reference-endpoints.ts';

export interface EndpointCheckRow {
  batch: string;
  /** The known endpoint (null: none known — the batch is replayed, not judged). */
  knownIndex: number | null;
  knownMin: number | null;
  knownSource: ReferenceEndpoint['source'] | null;
  /** Lab bracket of the known endpoint, minutes. */
  bracketMin: [number, number] | null;
  /** Where the rule reached done (spectrum index in the batch, minutes from its first spectrum); null: never. */
  firedIndex: number | null;
  firedMin: number | null;
  /** fired − known, in spectrum intervals and in minutes (negative: early). */
  intervals: number | null;
  minutes: number | null;
  /**
   * A batch without a known endpoint whose lab values never cross the target: the first spectrum
   * after its last lab value (not yet past the target) — the endpoint is no earlier — and that lab
   * value in words. A call before it is early (intervals and minutes are then counted from it).
   */
  notBefore?: { index: number; min: number; text: string } | null;
  /** The predicted property where the rule fired (property models only). */
  propertyAtFire: number | null;
  verdict: 'early' | 'within bracket' | 'on time' | 'late' | 'not reached' | 'no known endpoint';
  /** The call lies inside the lab bracket of the known endpoint (verdict 'within bracket'). */
  withinBracket: boolean;
}

export interface EndpointCheck {
  method: string;
  rows: EndpointCheckRow[];
  /** Batches called early (before the bracket's start, or before a mark), and the most intervals / minutes early among them (0 when none). */
  early: number;
  /** Batches called inside the lab bracket of their known endpoint (neither early nor late as far as the lab values can tell); absent in models built before that verdict. */
  withinBracketCount?: number;
  /** Always 0 since calls inside the bracket have their own verdict (kept for readers of older files, where it counted early calls inside the bracket). */
  earlyWithinBracket: number;
  earlyMaxIntervals: number;
  earlyMaxMinutes: number;
  late: number;
  onTime: number;
  notReached: number;
  noEndpoint: number;
  /** Median of fired − known over the batches judged that fired (intervals), null when none. */
  medianIntervals: number | null;
}

export const ENDPOINT_CHECK_METHOD =
  'leave-one-batch-out replay through the endpoint tracker: for each reference batch, property predictions from the PLS calibrated without its lab values and automatic thresholds and minimum time re-resolved from the other batches\u2019 known endpoints; the preprocessing, the PCA, the LV count and the automatic property margin are those of the model (not refitted per batch); run-time holds (alarms, predictions outside calibration) are not replayed — they can only delay a call. A lab endpoint is known only to lie in its lab bracket (after the last lab value short of the target, at or before the first past it): a call inside the bracket is \u2018within bracket\u2019, neither early nor late as far as the lab values can tell; early is a call at or before the bracket\u2019s start, late one after its end. A marked endpoint: early before the mark, late after it. A batch without one whose lab values never cross the target: early at or before its last lab value (not yet past the target).';

export interface CheckBatch extends CalibrationBatch {
  id: string;
  /** Original spectrum index of each kept spectrum. */
  kept: number[];
  /** Property prediction of each kept spectrum from the model without this batch (null: no property model). */
  predicted: ArrayLike<number> | null;
  endpoint: ReferenceEndpoint | null;
  /** Without a known endpoint: the first spectrum after the last lab value not yet past the target (see EndpointCheckRow.notBefore). */
  notBefore?: { index: number; min: number; text: string } | null;
}

function median(xs: number[]): number | null {
  if (xs.length === 0) return null;
  const s = [...xs].sort((a, b) => a - b);
  const m = s.length >> 1;
  return s.length % 2 ? s[m]! : (s[m - 1]! + s[m]!) / 2;
}

/** Replay one batch through a tracker with a rule; the kept-spectrum position where it reached done, or null. */
function replay(rule: ResolvedEndpointRule, b: CheckBatch, endRegion: { mean: number[]; sd: number[] } | null): number | null {
  const tracker = new EndpointTracker(rule);
  const mbsdCrit = rule.criteria.find((c) => c.kind === 'mbsd');
  const p = b.rows[0]?.length ?? 0;
  const mbsd = mbsdCrit && mbsdCrit.kind === 'mbsd' ? new MovingBlockSd(mbsdCrit.block, p) : null;
  const plateaus = rule.criteria.flatMap((c) => (c.kind === 'plateau' ? [{ pc: c.pc - 1, win: new PlateauWindow(c.window) }] : []));
  const needsEnd = rule.criteria.some((c) => c.kind === 'golden-end');
  const inputs: EndpointInputs = { property: null, mbsd: null, slopes: plateaus.map(() => null), goldenEndDistance: null, eta: null };
  const events: DomainEvent[] = [];
  const A = b.scores.length;
  for (let k = 0; k < b.rows.length; k++) {
    inputs.property = b.predicted ? b.predicted[k]! : null;
    inputs.mbsd = mbsd ? mbsd.push(b.rows[k]!) : null;
    for (let i = 0; i < plateaus.length; i++) inputs.slopes[i] = plateaus[i]!.win.push(b.elapsedMin[k]!, b.scores[plateaus[i]!.pc]![k]!);
    if (needsEnd && endRegion) {
      let d = 0;
      for (let a = 0; a < A; a++) {
        const sd = endRegion.sd[a]!;
        const z = sd > 0 ? (b.scores[a]![k]! - endRegion.mean[a]!) / sd : 0;
        d += z * z;
      }
      inputs.goldenEndDistance = d;
    }
    inputs.elapsedMin = b.elapsedMin[k]!;
    events.length = 0;
    const st = tracker.update(k, b.elapsedMin[k]!, inputs, events);
    if (st.state === 'done' || st.state === 'signalled') return k;
  }
  return null;
}

export function checkEndpointRule(spec: EndpointRuleSpec, batches: CheckBatch[], endValues: EndValues, opts: { A: number; confidence: number; property: PropertyContext | null }): EndpointCheck {
  const rows: EndpointCheckRow[] = batches.map((b, bi) => {
    const { criteria, endRegion, minElapsed } = resolveCriteria(spec, endValues, { ...opts, exclude: bi });
    const rule: ResolvedEndpointRule = { criteria, combine: spec.combine, confirm: spec.confirm, nearingMin: spec.nearingMin, ...(minElapsed ? { minElapsedMin: minElapsed.value, minElapsedMethod: minElapsed.method } : {}), ...resolvedGuards(spec) };
    const k = replay(rule, b, endRegion);
    const e = b.endpoint;
    const firedIndex = k === null ? null : b.kept[k]!;
    const firedMin = k === null ? null : b.elapsedMin[k]!;
    // Without a known endpoint, a call before a lab value that was not yet past the target is early all the same.
    const nb = !e && b.notBefore && firedIndex !== null && firedIndex < b.notBefore.index ? b.notBefore : null;
    const intervals = e && firedIndex !== null ? firedIndex - e.index : nb ? firedIndex! - nb.index : null;
    const minutes = e && firedMin !== null ? firedMin - e.elapsedMin : nb ? firedMin! - nb.min : null;
    const br = e?.bracket;
    const verdict: EndpointCheckRow['verdict'] = nb
      ? 'early'
      : !e
        ? 'no known endpoint'
        : firedIndex === null
          ? 'not reached'
          : br
            ? firedIndex <= br.fromIndex
              ? 'early'
              : firedIndex <= br.toIndex
                ? 'within bracket'
                : 'late'
            : intervals! < 0
              ? 'early'
              : intervals === 0
                ? 'on time'
                : 'late';
    return {
      batch: b.id,
      knownIndex: e ? e.index : null,
      knownMin: e ? e.elapsedMin : null,
      knownSource: e ? e.source : null,
      bracketMin: e?.bracket ? [e.bracket.fromMin, e.bracket.toMin] : null,
      firedIndex,
      firedMin,
      intervals,
      minutes,
      ...(!e && b.notBefore ? { notBefore: b.notBefore } : {}),
      propertyAtFire: k !== null && b.predicted ? b.predicted[k]! : null,
      verdict,
      withinBracket: verdict === 'within bracket',
    };
  });
  const early = rows.filter((r) => r.verdict === 'early');
  return {
    method: ENDPOINT_CHECK_METHOD,
    rows,
    early: early.length,
    withinBracketCount: rows.filter((r) => r.verdict === 'within bracket').length,
    earlyWithinBracket: 0,
    earlyMaxIntervals: early.reduce((m, r) => Math.max(m, -r.intervals!), 0),
    earlyMaxMinutes: early.reduce((m, r) => Math.max(m, -r.minutes!), 0),
    late: rows.filter((r) => r.verdict === 'late').length,
    onTime: rows.filter((r) => r.verdict === 'on time').length,
    notReached: rows.filter((r) => r.verdict === 'not reached').length,
    noEndpoint: rows.filter((r) => r.verdict === 'no known endpoint').length,
    medianIntervals: median(rows.filter((r) => r.intervals !== null && r.knownIndex !== null).map((r) => r.intervals!)),
  };
}

/** One sentence naming the early batches and by how much (for the approval refusal and the report). */
export function earlyBatchesText(c: EndpointCheck): string {
  const early = c.rows.filter((r) => r.verdict === 'early');
  if (early.length === 0) return 'the rule reached done before the known endpoint on no reference batch';
  const fmt = (v: number) => v.toFixed(1);
  return `the rule reached done before the known endpoint on ${early.length} of ${c.rows.length} reference batches: ${early
    .map((r) =>
      r.knownIndex === null && r.notBefore
        ? `"${r.batch}" at least ${-r.intervals!} interval${r.intervals === -1 ? '' : 's'} (${fmt(-r.minutes!)} min) early (no known endpoint, but done before its ${r.notBefore.text})`
        : `"${r.batch}" ${-r.intervals!} interval${r.intervals === -1 ? '' : 's'} (${fmt(-r.minutes!)} min) early${r.bracketMin ? ` (at or before its lab bracket ${fmt(r.bracketMin[0])}–${fmt(r.bracketMin[1])} min began)` : ''}`,
    )
    .join(', ')}`;
}
