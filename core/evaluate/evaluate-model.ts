/**
 * Measured evaluation of a monitoring model on batches with known truth: every batch is
 * replayed spectrum by spectrum through a fresh batch monitor, exactly as live.
 *
 * Figures (definitions ours, stated here):
 * - false_alarm_point_rate: on good batches, the fraction of spectra whose T² (resp. Q) exceeds the
 *   limit in force (the per-progress-point limit at the model's confidence); the larger of the two
 *   rates. Compare with 1 − confidence plus a binomial tolerance 3·√(α(1−α)/N).
 * - false_alarm_batch_rate: good batches with any confirmed alarm (a condition turned active after
 *   its on-delay).
 * - detection_delay (per fault group): spectrum intervals from the fault's onset to the first
 *   confirmed alarm at or after onset (for a drop-out: the stale alarm, core/evaluate/stale.ts).
 * - endpoint_error: detected − true endpoint, in spectrum intervals, on good batches;
 *   endpoint_early_max: the largest (true − detected) over good batches (≤ 0 means never early).
 *   endpoint_error_median_min: the same median in minutes (interval × nominal spacing);
 *   endpoint_property_at_call: the true property at the detected endpoint (median, min, max), when
 *   the batches carry their true property — how far past the target a call lands, in the
 *   property's own units, which says more than intervals for a slow process.
 * - false_alarm_batch_rate_ci95: the exact binomial (Clopper & Pearson 1934, Biometrika 26:404)
 *   95 % interval of the batch rate: with 30 good batches one alarm more or less moves the rate by
 *   0.033, so the interval says what the count can and cannot show.
 * - eta_error: |estimated − true time to endpoint| in minutes over the last quarter of the span
 *   from batch start to the true endpoint, on good batches.
 * - prediction_extrapolating_rate: on good batches, the fraction of spectra whose property
 *   prediction is flagged as outside its calibration (X-space T² or Q of the PLS beyond its limit);
 *   calibrated at a stated confidence, it should be near 1 − confidence: compare with the same
 *   binomial tolerance as the false-alarm point rate (spectra of one batch are not independent,
 *   so read it as a guide, not a test of exact size).
 * - Bad pixels (docs/bad-pixels.md), over the batches whose truth names damaged pixels (the pixel
 *   faults of the simulators: stuck, dead, spikes, saturation):
 *   bad_pixel_detected_rate: damaged spectra whose every damaged pixel is flagged, over all damaged
 *   spectra (a stuck pixel cannot be found before it has repeated over `stuckSpectra` spectra: those
 *   first spectra count as missed);
 *   bad_pixel_false_alarm_batch_rate: batches with damaged pixels (the process itself good) that
 *   raised a confirmed process alarm (any condition but the analyzer-quality one): what the pixels
 *   would cost without their handling; compare with false_alarm_batch_rate;
 *   bad_pixel_false_alarm_batch_rate_without_check: the same batches judged with the pixel check
 *   off (every pixel as sent): batches with any confirmed alarm;
 *   bad_pixel_analyzer_alarm_batch_rate: those batches that raised the analyzer-quality alarm;
 *   bad_pixel_unjudged_rate: damaged spectra not judged (too damaged);
 *   bad_pixel_flagged_good_rate: spectra of good batches with any pixel flagged (false flags).
 */
import type { MonitoringModel } from '../model/monitoring-model.ts';
import { createBatchMonitor } from '../monitor/batch-monitor.ts';
import { createPixelQualityChecker } from '../quality/pixel-quality.ts';
import { staleAlarmTime } from './stale.ts';
import { clopperPearson } from '../stats/clopper-pearson.ts';

export interface EvalBatch {
  id: string;
  /** 'good' or the fault type. */
  group: string;
  times: ArrayLike<number>;
  spectra: ArrayLike<number>[];
  /** Indices never transmitted (drop-out): skipped in the replay. */
  dropped?: ArrayLike<number>;
  /** True endpoint index (null when the batch never reached it). */
  endpointIndex: number | null;
  /** Onset index of the injected fault (null for good batches). */
  faultOnsetIndex: number | null;
  /** Pixel faults: the damaged pixels of each damaged spectrum (truth). */
  badPixels?: { index: number; pixels: number[] }[];
  /** Nominal seconds between spectra. */
  intervalS: number;
  /** True property per spectrum (optional): gives endpoint_property_at_call. */
  property?: ArrayLike<number>;
}

export interface EvaluateOptions {
  /** Nominal intervals without data before the stale alarm (default 3). */
  staleAfter?: number;
}

export interface BatchOutcome {
  id: string;
  group: string;
  spectra: number;
  pointsOutsideT2: number;
  pointsOutsideQ: number;
  suspects: number;
  alarms: number;
  firstAlarm: { index: number; kind: string; key: string } | null;
  /** First confirmed alarm at or after the fault onset, and its delay in intervals. */
  detection: { index: number; key: string; delay: number } | null;
  falseAlarmsBeforeOnset: number;
  endpointIndex: number | null;
  detectedEndpointIndex: number | null;
  endpointError: number | null;
  /** True property at the detected endpoint (when the batch carries it). */
  propertyAtCall: number | null;
  etaErrors: number[];
  maxT2: number;
  maxQ: number;
  /** Spectra with a property prediction, and of those flagged as extrapolating (outside the calibration). */
  predictions: number;
  extrapolating: number;
  /** Spectra with any pixel flagged; not judged (too damaged). */
  flaggedSpectra: number;
  unjudged: number;
  /** Truth-damaged spectra, and of those with every damaged pixel flagged. */
  damagedSpectra: number;
  damagedDetected: number;
  /** Confirmed alarms of the process conditions (all but the analyzer-quality one) and of the analyzer-quality one. */
  processAlarms: number;
  analyzerAlarms: number;
  /** Batches with damaged pixels: confirmed alarms of the same batch judged with the pixel check off (null otherwise). */
  alarmsWithoutCheck: number | null;
}

export interface GroupFigures {
  batches: number;
  detected: number;
  detection_delay_median: number | null;
  detection_delay_max: number | null;
}

export interface EvaluationFigures {
  modelId: string;
  confidence: number;
  good_batches: number;
  good_spectra: number;
  false_alarm_point_rate: number;
  false_alarm_point_rate_t2: number;
  false_alarm_point_rate_q: number;
  /** 1 − confidence + 3·√(α(1−α)/N). */
  false_alarm_point_rate_bound: number;
  false_alarm_batch_rate: number;
  /** Clopper–Pearson 95 % interval of false_alarm_batch_rate. */
  false_alarm_batch_rate_ci95: [number, number];
  detection_delay_median: Record<string, number | null>;
  faults: Record<string, GroupFigures>;
  endpoint_error_median: number | null;
  endpoint_error_median_min: number | null;
  endpoint_property_at_call: { median: number; min: number; max: number } | null;
  endpoint_early_max: number | null;
  endpoint_late_max: number | null;
  endpoint_missed: number;
  eta_error_median: number | null;
  /**
   * On good batches, the fraction of spectra whose property prediction is flagged as outside its
   * calibration (extrapolating), with the flag's confidence and the binomial bound
   * (1 − confidence) + 3·√(α(1−α)/N); null without a property model.
   */
  prediction_extrapolating_rate: number | null;
  prediction_extrapolating_confidence: number | null;
  prediction_extrapolating_rate_bound: number | null;
  /** The largest per-batch rate among the good batches. */
  prediction_extrapolating_batch_max: number | null;
  /** Bad-pixel figures (null when no batch has damaged pixels), defined in the header. */
  bad_pixel_detected_rate: number | null;
  bad_pixel_false_alarm_batch_rate: number | null;
  /** The same batches judged with the pixel check off (every pixel as sent): batches with any confirmed alarm. */
  bad_pixel_false_alarm_batch_rate_without_check: number | null;
  bad_pixel_analyzer_alarm_batch_rate: number | null;
  bad_pixel_unjudged_rate: number | null;
  bad_pixel_batches: number;
  bad_pixel_flagged_good_rate: number;
  batches: BatchOutcome[];
}

export function median(xs: number[]): number | null {
  const s = xs.filter(Number.isFinite).sort((a, b) => a - b);
  if (s.length === 0) return null;
  const m = s.length >> 1;
  return s.length % 2 ? s[m] : (s[m - 1] + s[m]) / 2;
}

export { clopperPearson };

/** Replay one batch and score it against its truth. */
export function evaluateBatch(model: MonitoringModel, b: EvalBatch, opts: EvaluateOptions = {}): BatchOutcome {
  const staleAfter = opts.staleAfter ?? 3;
  const intervalMs = b.intervalS * 1000;
  const dropped = new Set(Array.from(b.dropped ?? []));
  const t0 = b.times[0];
  const mon = createBatchMonitor(model, t0);
  const out: BatchOutcome = {
    id: b.id, group: b.group, spectra: 0, pointsOutsideT2: 0, pointsOutsideQ: 0, suspects: 0, alarms: 0, firstAlarm: null, detection: null,
    falseAlarmsBeforeOnset: 0, endpointIndex: b.endpointIndex, detectedEndpointIndex: null, endpointError: null, propertyAtCall: null, etaErrors: [], maxT2: 0, maxQ: 0,
    predictions: 0, extrapolating: 0, flaggedSpectra: 0, unjudged: 0, damagedSpectra: 0, damagedDetected: 0, processAlarms: 0, analyzerAlarms: 0, alarmsWithoutCheck: null,
  };
  // A batch with damaged pixels is also judged with the check off: what the pixels cost without it.
  const unchecked = (b.badPixels?.length ?? 0) > 0 ? createBatchMonitor(model, t0, { pixelQuality: false }) : null;
  if (unchecked) out.alarmsWithoutCheck = 0;
  const pixelCheck = createPixelQualityChecker(model.chain.inputAxis.length);
  const damage = new Map<number, number[]>();
  for (const d of b.badPixels ?? []) damage.set(d.index, d.pixels);
  const onset = b.faultOnsetIndex;
  const etaFrom = b.endpointIndex !== null ? Math.floor(0.75 * b.endpointIndex) : Infinity;
  const trueEndT = b.endpointIndex !== null ? b.times[b.endpointIndex] : null;
  let prevT: number | null = null;
  const noteAlarm = (index: number, kind: string, key: string, atT: number): void => {
    out.alarms++;
    if (!out.firstAlarm) out.firstAlarm = { index, kind, key };
    if (onset !== null && index >= onset) {
      if (!out.detection) out.detection = { index, key, delay: onset !== null ? (atT - b.times[onset]) / intervalMs : 0 };
    } else if (onset !== null) out.falseAlarmsBeforeOnset++;
  };
  for (let i = 0; i < b.spectra.length; i++) {
    if (dropped.has(i)) continue;
    const t = b.times[i];
    if (prevT !== null) {
      const st = staleAlarmTime(prevT, t, intervalMs, staleAfter);
      if (st !== null) {
        // index of the first expected-but-missing spectrum at or after the stale time
        const idx = Math.max(0, Math.min(b.spectra.length - 1, Math.round((st - t0) / intervalMs)));
        noteAlarm(idx, 'stale', 'stale', st);
      }
    }
    prevT = t;
    const r = mon.push(i, t, b.spectra[i]);
    out.spectra++;
    if (unchecked) for (const c of unchecked.push(i, t, b.spectra[i]).conditionChanges) if (c.active) out.alarmsWithoutCheck!++;
    const lim = r.localLimits ?? r.limits;
    if (r.t2 > lim.t2) out.pointsOutsideT2++;
    if (r.q > lim.q) out.pointsOutsideQ++;
    if (r.suspect) out.suspects++;
    if (r.prediction) {
      out.predictions++;
      if (r.prediction.extrapolating) out.extrapolating++;
    }
    if (r.t2 > out.maxT2) out.maxT2 = r.t2;
    if (r.q > out.maxQ) out.maxQ = r.q;
    for (const c of r.conditionChanges) {
      if (!c.active) continue;
      noteAlarm(i, c.kind, c.key, t);
      if (c.kind === 'analyzer') out.analyzerAlarms++;
      else out.processAlarms++;
    }
    const qy = r.quality;
    if (qy) {
      out.flaggedSpectra++;
      if (!qy.judged) out.unjudged++;
    }
    // The monitor's own check, replayed beside it (same settings, same history): which pixels it flagged.
    const flagged = pixelCheck.check(b.spectra[i]).mask;
    const dmg = damage.get(i);
    if (dmg && dmg.length) {
      out.damagedSpectra++;
      if (dmg.every((j) => flagged[j] !== 0)) out.damagedDetected++;
    }
    if (out.detectedEndpointIndex === null && r.endpoint.doneAt) out.detectedEndpointIndex = r.endpoint.doneAt.seq;
    if (trueEndT !== null && i >= etaFrom && i < b.endpointIndex! && r.endpoint.etaMin) {
      out.etaErrors.push(Math.abs(r.endpoint.etaMin.median - (trueEndT - t) / 60000));
    }
  }
  // A drop-out running to the end of the batch: the stale alarm still comes on the clock.
  const lastT = b.times[b.times.length - 1];
  if (prevT !== null && prevT < lastT) {
    const st = staleAlarmTime(prevT, lastT + intervalMs, intervalMs, staleAfter);
    if (st !== null) noteAlarm(Math.min(b.spectra.length - 1, Math.round((st - t0) / intervalMs)), 'stale', 'stale', st);
  }
  if (out.detectedEndpointIndex !== null && b.endpointIndex !== null) out.endpointError = out.detectedEndpointIndex - b.endpointIndex;
  if (out.detectedEndpointIndex !== null && b.property && out.detectedEndpointIndex < b.property.length) out.propertyAtCall = b.property[out.detectedEndpointIndex];
  return out;
}

export function evaluateModel(model: MonitoringModel, batches: EvalBatch[], opts: EvaluateOptions = {}): EvaluationFigures {
  if (batches.length === 0) throw new RangeError('evaluateModel: no batches to judge');
  const outcomes = batches.map((b) => evaluateBatch(model, b, opts));
  const good = outcomes.filter((o) => o.group === 'good');
  const conf = model.limits.t2.confidence;
  const N = good.reduce((s, o) => s + o.spectra, 0);
  const rT2 = N ? good.reduce((s, o) => s + o.pointsOutsideT2, 0) / N : NaN;
  const rQ = N ? good.reduce((s, o) => s + o.pointsOutsideQ, 0) / N : NaN;
  const alpha = 1 - conf;
  const faults: Record<string, GroupFigures> = {};
  const delays: Record<string, number | null> = {};
  for (const g of [...new Set(outcomes.map((o) => o.group))].filter((g) => g !== 'good')) {
    const os = outcomes.filter((o) => o.group === g);
    const d = os.flatMap((o) => (o.detection ? [o.detection.delay] : []));
    // An undetected batch counts as an infinite delay in the median.
    const all = os.map((o) => (o.detection ? o.detection.delay : Infinity)).sort((a, b) => a - b);
    const m = all.length >> 1;
    const med = all.length === 0 ? null : all.length % 2 ? all[m] : (all[m - 1] + all[m]) / 2;
    faults[g] = { batches: os.length, detected: d.length, detection_delay_median: med === null || !Number.isFinite(med) ? null : med, detection_delay_max: d.length === os.length && d.length ? Math.max(...d) : null };
    delays[g] = faults[g].detection_delay_median;
  }
  const errs = good.flatMap((o) => (o.endpointError !== null ? [o.endpointError] : []));
  const eta = good.flatMap((o) => o.etaErrors);
  // outcomes[i] is batches[i]'s
  const errsMin = outcomes.flatMap((o, i) => (o.group === 'good' && o.endpointError !== null ? [(o.endpointError * batches[i].intervalS) / 60] : []));
  const atCall = good.flatMap((o) => (o.propertyAtCall !== null && Number.isFinite(o.propertyAtCall) ? [o.propertyAtCall] : []));
  const goodAlarmed = good.filter((o) => o.alarms > 0).length;
  const nPred = good.reduce((s, o) => s + o.predictions, 0);
  const xConf = model.pls ? model.pls.limits.confidence : null;
  const xAlpha = xConf === null ? NaN : 1 - xConf;
  const px = outcomes.filter((o, i) => (batches[i].badPixels?.length ?? 0) > 0);
  const dmg = px.reduce((s, o) => s + o.damagedSpectra, 0);
  const goodFlagged = good.reduce((s, o) => s + o.flaggedSpectra, 0);
  return {
    modelId: model.id,
    confidence: conf,
    good_batches: good.length,
    good_spectra: N,
    false_alarm_point_rate: Math.max(rT2, rQ),
    false_alarm_point_rate_t2: rT2,
    false_alarm_point_rate_q: rQ,
    false_alarm_point_rate_bound: alpha + 3 * Math.sqrt((alpha * (1 - alpha)) / Math.max(1, N)),
    false_alarm_batch_rate: good.length ? goodAlarmed / good.length : NaN,
    false_alarm_batch_rate_ci95: good.length ? clopperPearson(goodAlarmed, good.length) : [NaN, NaN],
    detection_delay_median: delays,
    faults,
    endpoint_error_median: median(errs),
    endpoint_error_median_min: median(errsMin),
    endpoint_property_at_call: atCall.length ? { median: median(atCall)!, min: Math.min(...atCall), max: Math.max(...atCall) } : null,
    endpoint_early_max: errs.length ? Math.max(...errs.map((e) => -e)) : null,
    endpoint_late_max: errs.length ? Math.max(...errs) : null,
    endpoint_missed: good.filter((o) => o.endpointIndex !== null && o.detectedEndpointIndex === null).length,
    eta_error_median: median(eta),
    prediction_extrapolating_rate: nPred ? good.reduce((s, o) => s + o.extrapolating, 0) / nPred : null,
    prediction_extrapolating_confidence: xConf,
    prediction_extrapolating_rate_bound: nPred && xConf !== null ? xAlpha + 3 * Math.sqrt((xAlpha * (1 - xAlpha)) / nPred) : null,
    prediction_extrapolating_batch_max: nPred ? Math.max(...good.filter((o) => o.predictions > 0).map((o) => o.extrapolating / o.predictions)) : null,
    bad_pixel_detected_rate: dmg ? px.reduce((s, o) => s + o.damagedDetected, 0) / dmg : null,
    bad_pixel_false_alarm_batch_rate: px.length ? px.filter((o) => o.processAlarms > 0).length / px.length : null,
    bad_pixel_false_alarm_batch_rate_without_check: px.length ? px.filter((o) => (o.alarmsWithoutCheck ?? 0) > 0).length / px.length : null,
    bad_pixel_analyzer_alarm_batch_rate: px.length ? px.filter((o) => o.analyzerAlarms > 0).length / px.length : null,
    bad_pixel_unjudged_rate: dmg ? px.reduce((s, o) => s + o.unjudged, 0) / dmg : null,
    bad_pixel_batches: px.length,
    bad_pixel_flagged_good_rate: N ? goodFlagged / N : NaN,
    batches: outcomes,
  };
}

/** Markdown summary of the figures (stdout of `npm run evaluate`). */
export function evaluationMarkdown(f: EvaluationFigures): string {
  const n = (x: number | null, d = 2): string => (x === null || !Number.isFinite(x) ? '—' : x.toFixed(d));
  const lines = [
    `## Evaluation of model ${f.modelId}`,
    '',
    `${f.good_batches} good batches (${f.good_spectra} spectra), limits at ${(f.confidence * 100).toFixed(1)} %.`,
    '',
    '| figure | value | target |',
    '| --- | --- | --- |',
    `| false_alarm_point_rate (max of T², Q) | ${n(f.false_alarm_point_rate, 4)} (T² ${n(f.false_alarm_point_rate_t2, 4)}, Q ${n(f.false_alarm_point_rate_q, 4)}) | ≤ ${n(f.false_alarm_point_rate_bound, 4)} |`,
    `| false_alarm_batch_rate | ${n(f.false_alarm_batch_rate, 3)} (95 % CI ${n(f.false_alarm_batch_rate_ci95[0], 3)}–${n(f.false_alarm_batch_rate_ci95[1], 3)}) | ≤ 0.05 |`,
    `| endpoint_error_median (intervals) | ${n(f.endpoint_error_median, 1)} (${n(f.endpoint_error_median_min, 1)} min) | ≤ 2 |`,
    `| endpoint_early_max (intervals) | ${n(f.endpoint_early_max, 0)} | ≤ 1 |`,
    `| endpoint_late_max (intervals) | ${n(f.endpoint_late_max, 0)} | reported |`,
    `| endpoint_missed (batches) | ${f.endpoint_missed} | reported |`,
    `| true property at the call (median, min–max) | ${f.endpoint_property_at_call ? `${n(f.endpoint_property_at_call.median, 3)} (${n(f.endpoint_property_at_call.min, 3)}–${n(f.endpoint_property_at_call.max, 3)})` : '—'} | reported |`,
    `| eta_error_median (min, last quarter) | ${n(f.eta_error_median, 2)} | reported |`,
    `| prediction_extrapolating_rate | ${n(f.prediction_extrapolating_rate, 4)} (largest batch ${n(f.prediction_extrapolating_batch_max, 3)}) | ${f.prediction_extrapolating_rate_bound === null ? 'reported' : `≤ ${n(f.prediction_extrapolating_rate_bound, 4)} (flag at ${n((f.prediction_extrapolating_confidence ?? NaN) * 100, 1)} %)`} |`,
    `| bad_pixel_detected_rate (damaged spectra, ${f.bad_pixel_batches} batches) | ${n(f.bad_pixel_detected_rate, 3)} | reported |`,
    `| bad_pixel_false_alarm_batch_rate (process alarms) | ${n(f.bad_pixel_false_alarm_batch_rate, 3)} | near false_alarm_batch_rate |`,
    `| bad_pixel_false_alarm_batch_rate_without_check (pixels judged as sent) | ${n(f.bad_pixel_false_alarm_batch_rate_without_check, 3)} | reported |`,
    `| bad_pixel_analyzer_alarm_batch_rate | ${n(f.bad_pixel_analyzer_alarm_batch_rate, 3)} | reported |`,
    `| bad_pixel_unjudged_rate (damaged spectra) | ${n(f.bad_pixel_unjudged_rate, 3)} | reported |`,
    `| bad_pixel_flagged_good_rate (good spectra) | ${n(f.bad_pixel_flagged_good_rate, 5)} | 0 |`,
    '',
    '| fault | batches | detected | detection_delay_median (spectra) | max |',
    '| --- | --- | --- | --- | --- |',
    ...Object.entries(f.faults).map(([g, x]) => `| ${g} | ${x.batches} | ${x.detected} | ${n(x.detection_delay_median, 1)} | ${n(x.detection_delay_max, 1)} |`),
    '',
    'Tideline advises: the site\'s validated control strategy, interlocks and procedures decide what an alarm or endpoint signal may do.',
  ];
  return lines.join('\n');
}
