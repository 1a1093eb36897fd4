/**
 * The batch monitor: one per unit and batch, fed one spectrum at a time. Per spectrum it
 * preprocesses (the model's chain, once), projects on the PCA model, computes T², Q and the
 * combined index, the envelope status of every PC at the current progress, the alarm conditions
 * (on-delay / off-delay, core/monitor/condition-filter.ts) and the endpoint state
 * (core/endpoint). Work buffers are allocated here, at creation; a push allocates only the small
 * result object. Deterministic: replaying the stored spectra of a batch through a new monitor
 * rebuilds the exact state.
 *
 * Bad pixels (core/quality/pixel-quality.ts) are found on the raw spectrum first. A spectrum with a
 * few is bridged for the chain (core/quality/bad-pixels.ts) and projected with the model variables
 * its bad pixels reach treated as missing, by trimmed score regression (core/pca/tsr-projector.ts);
 * its result carries `quality`. One with more than the allowed share of bad pixels is not judged:
 * its result says so and no condition, progress or endpoint state moves. Bad pixels on `onDelay` of
 * `onWindow` spectra raise the analyzer-quality condition (kind 'analyzer', key 'pixel-quality').
 *
 * Suspect scans (a single point beyond a limit that raised no alarm on its own, `suspect`) are one
 * by one taken as bad scans, not as the process; but `count` of them within the last `window`
 * judged spectra (default 3 in 20: common practice, no source) point at the probe or the analyzer
 * (fouling, a fibre, the lamp, bubbles) and raise the repeated-suspect condition (kind 'analyzer',
 * key 'repeated-suspect'); it clears when the window holds fewer than `count` again.
 *
 * Tideline advises: the site's validated control strategy, interlocks and procedures decide what
 * an alarm or an endpoint signal may do.
 */
import { createProjector } from '../pca/projector.ts';
import { combinedIndex } from '../limits/index.ts';
import { contributions as pcaContributions } from '../contributions/index.ts';
import { goldenEndProgress, gridIndex, progressFraction } from '../envelope/envelope.ts';
import { newObservationMultiplier } from '../envelope/band.ts';
import { ProgressTracker } from '../envelope/progress.ts';
import { MovingBlockSd } from '../envelope/mbsd.ts';
import { EndpointTracker, type EndpointInputs } from '../endpoint/endpoint-tracker.ts';
import { PlateauWindow } from '../endpoint/plateau.ts';
import { sumByRegion } from '../bands/nir-bands.ts';
import type { MonitoringModel } from '../model/monitoring-model.ts';
import { ConditionFilter } from './condition-filter.ts';
import { EtaEstimator } from './eta.ts';
import { PaceCheck, type PaceStatus } from './pace.ts';
import { createTsrProjector } from '../pca/tsr-projector.ts';
import { createPixelQualityChecker, resolvePixelQuality, type PixelQualitySettings } from '../quality/pixel-quality.ts';
import { bridgeBadPixels, ChainFootprint } from '../quality/bad-pixels.ts';
import type { AlarmPriority, ConditionChange, ConditionKind, Contributions, DomainEvent, EndpointStatus, EnvelopeCheck, MonitorResult, SpectrumQuality } from './types.ts';

export interface BatchMonitorOptions {
  /** Pixel-quality settings (defaults: DEFAULT_PIXEL_QUALITY), or false to judge every spectrum as sent. */
  pixelQuality?: Partial<PixelQualitySettings> | false;
  /**
   * Repeated suspect scans: `count` suspect scans within the last `window` judged spectra raise the
   * repeated-suspect condition (defaults: DEFAULT_SUSPECT_SCANS), or false never to raise it.
   */
  suspectScans?: Partial<SuspectScanSettings> | false;
}

export interface SuspectScanSettings {
  /** Suspect scans within the window that raise the condition (1…window). */
  count: number;
  /** Judged spectra in the window (1…31). */
  window: number;
}

/** 3 suspect scans within the last 20 judged spectra: common practice, no source. */
export const DEFAULT_SUSPECT_SCANS: Readonly<SuspectScanSettings> = { count: 3, window: 20 };

/** Key of the analyzer condition the monitor raises on repeated suspect scans. */
export const REPEATED_SUSPECT_KEY = 'repeated-suspect';

export function resolveSuspectScans(s: Partial<SuspectScanSettings>): SuspectScanSettings {
  const out = { ...DEFAULT_SUSPECT_SCANS, ...s };
  if (!Number.isInteger(out.window) || out.window < 1 || out.window > 31) throw new RangeError(`suspectScans.window must be an integer 1…31 (got ${out.window})`);
  if (!Number.isInteger(out.count) || out.count < 1 || out.count > out.window) throw new RangeError(`suspectScans.count must be an integer 1…window (${out.window}) (got ${out.count})`);
  return out;
}

/** Key of the analyzer-quality condition the monitor raises on repeated bad pixels. */
export const PIXEL_QUALITY_KEY = 'pixel-quality';

export interface BatchMonitor {
  push(seq: number, t: number, values: Float32Array | ArrayLike<number>): MonitorResult;
  contributions(values: Float32Array | ArrayLike<number>): Contributions;
  markSignalled(t: number): DomainEvent | null;
}

interface Cond {
  kind: ConditionKind;
  key: string;
  label: string;
  priority: AlarmPriority;
  filter: ConditionFilter;
}

function fmt(x: number): string {
  const a = Math.abs(x);
  return a >= 100 ? x.toFixed(0) : a >= 10 ? x.toFixed(1) : a >= 1 ? x.toFixed(2) : x.toPrecision(3);
}

export function createBatchMonitor(model: MonitoringModel, batchStartT: number, opts: BatchMonitorOptions = {}): BatchMonitor {
  if (!Number.isFinite(batchStartT)) throw new RangeError(`batch start ${batchStartT} is not a time`);
  const { chain, pca, envelope: env, limits } = model;
  const pIn = chain.inputAxis.length;
  const p = chain.outputAxis.length;
  const A = pca.nComponents;
  const xp = new Float64Array(p);
  const xc = new Float64Array(p);
  const projector = createProjector(pca);
  const pls = model.pls;
  const progress = new ProgressTracker(env.axis);
  const eta = new EtaEstimator(env);
  const endProgress = goldenEndProgress(env);
  const alarmSpec = model.settings.alarms;
  // Which T²/Q limits the alarm conditions use: the global ones (default) or the per-progress-point ones.
  const useLocal = (model.settings.alarms.limits ?? 'local') === 'local';
  // Designed suppression during start-up (ISA-18.2 state-based alarming): no conditions evaluated
  // in the first startupMin minutes, while the batch settles.
  const startupMin = model.settings.alarms.startupMin ?? 0;
  const t2Lim = limits.t2.value;
  const qLim = limits.q.value;
  const cLim = limits.combined.value;
  const conf = limits.t2.confidence;
  // Alarm (action) limits when the model has them (settings.alarms.confidence above the model's
  // confidence); otherwise the alarms use the limits drawn.
  const al = model.alarmLimits;
  const aT2 = al ? al.t2.value : t2Lim;
  const aQ = al ? al.q.value : qLim;
  const aC = al ? al.combined.value : cLim;
  const aK = al ? al.envelopeK : env.k;
  const aT2Local = al && env.t2AlarmLimit ? env.t2AlarmLimit : env.t2Limit;
  const aQLocal = al && env.qAlarmLimit ? env.qAlarmLimit : env.qLimit;
  const aConf = al ? al.confidence : conf;
  const confPct = `${+(aConf * 100).toFixed(2)} %`;
  const conds: Cond[] = [
    { kind: 't2', key: 't2', label: 'T²', priority: 2, filter: new ConditionFilter(alarmSpec) },
    { kind: 'q', key: 'q', label: 'Q', priority: 2, filter: new ConditionFilter(alarmSpec) },
  ];
  // The combined index (Yue & Qin 2001) has a limit only for the global T²/Q limits: it raises a
  // condition when those are in force; with per-point limits it is reported, not alarmed.
  if (!useLocal) conds.push({ kind: 'combined', key: 'combined', label: 'combined index', priority: 3, filter: new ConditionFilter(alarmSpec) });
  const firstEnv = conds.length;
  // Envelope conditions per PC, except the PC that is itself the progress indicator (its envelope is
  // the progress axis and says nothing).
  const indicatorPc = env.axis.kind === 'indicator' && env.axis.source === 'pc1' ? 0 : -1;
  for (let a = 0; a < A; a++) if (a !== indicatorPc) conds.push({ kind: 'envelope', key: `pc${a + 1}`, label: `PC${a + 1}`, priority: 3, filter: new ConditionFilter(alarmSpec) });
  // Envelope conditions are judged only where enough reference batches passed (common practice, no source).
  const minBatches = Math.max(3, Math.ceil(env.nBatches / 3));
  // Pace (indicator axis only): one-sided band for one new batch at the alarm confidence,
  // t(conf; I − 1)·√(1 + 1/I) of ln(time), when the envelope uses prediction bands; else k sd.
  const paceK = model.settings.envelope.band === 'prediction' ? newObservationMultiplier(aConf, env.nBatches) : aK;
  const pace = model.settings.alarms.pace === true && env.axis.kind === 'indicator' ? new PaceCheck(env, paceK, minBatches) : null;
  if (pace) conds.push({ kind: 'envelope', key: 'pace', label: 'pace', priority: 3, filter: new ConditionFilter(alarmSpec) });
  const paceCond = pace ? conds.length - 1 : -1;
  const condPc = conds.map((c) => (c.kind === 'envelope' && c.key.startsWith('pc') ? Number(c.key.slice(2)) - 1 : -1));
  const rule = model.endpoint;
  const endpoint = new EndpointTracker(rule);
  const mbsdCrit = rule.criteria.find((c) => c.kind === 'mbsd');
  const mbsd = mbsdCrit && mbsdCrit.kind === 'mbsd' ? new MovingBlockSd(mbsdCrit.block, p) : null;
  const plateaus = rule.criteria.flatMap((c) => (c.kind === 'plateau' ? [{ pc: c.pc - 1, win: new PlateauWindow(c.window) }] : []));
  const endMean = env.endRegion?.mean ?? [];
  const endSd = env.endRegion?.sd ?? [];
  const needsEnd = rule.criteria.some((c) => c.kind === 'golden-end');
  const inputs: EndpointInputs = { property: null, mbsd: null, slopes: plateaus.map(() => null), goldenEndDistance: null, eta: null, standingAlarms: [] };
  // Per condition, while it stands: how it came up, in words (for the endpoint's alarm guard).
  const standing: (string | null)[] = conds.map(() => null);
  let lastSeq = -1;
  let lastT = batchStartT;
  // Pixel quality: checker with its history, bridged spectrum, missing-variable mask, TSR projector.
  const pqSettings = opts.pixelQuality === false ? null : resolvePixelQuality(opts.pixelQuality ?? {});
  const checker = pqSettings ? createPixelQualityChecker(pIn, pqSettings) : null;
  const bridged = new Float64Array(pIn);
  const missing = new Uint8Array(p);
  const footprint = new ChainFootprint(chain);
  const tsr = createTsrProjector(pca);
  const qualityFilter = new ConditionFilter(alarmSpec);
  // Repeated suspect scans: the last `window` judged spectra as a bit ring (1 = suspect).
  const ssSettings = opts.suspectScans === false ? null : resolveSuspectScans(opts.suspectScans ?? {});
  const ssMask = ssSettings ? (2 ** ssSettings.window) - 1 : 0;
  let ssBits = 0;
  let ssActive = false;
  let lastProgress = 0;
  let lastProgressFraction = 0;
  let lastEndpoint: EndpointStatus | null = null;

  function flagText(qy: SpectrumQuality): string {
    return Object.entries(qy.flags).filter(([, n]) => n > 0).map(([f, n]) => `${f} ${n}`).join(', ');
  }

  /** The analyzer-quality condition for this spectrum (bad pixel count against 0.5). */
  function qualityCondition(bad: number, qy: SpectrumQuality | undefined, seq: number, t: number, changes: ConditionChange[], events: DomainEvent[]): void {
    const u = qualityFilter.update(bad, 0.5);
    if (!u.changed) return;
    const message = u.active
      ? `analyzer pixel quality: bad pixels on ${alarmSpec.onDelay} of the last ${alarmSpec.onWindow} spectra (now ${bad}: ${qy ? flagText(qy) : ''}); spectra with a few bad pixels are judged with them missing, more than ${+((pqSettings?.maxBadFraction ?? 0) * 100).toFixed(2)} % bad are not judged`
      : `analyzer pixel quality back to normal: no bad pixels on ${alarmSpec.offDelay} spectra in a row`;
    const change: ConditionChange = { kind: 'analyzer', key: PIXEL_QUALITY_KEY, active: u.active, message, value: bad, limit: 0.5, priority: 3 };
    changes.push(change);
    events.push({ type: 'condition', change, t, seq });
  }

  /** The repeated-suspect condition after a judged spectrum (suspect or not). */
  function suspectCondition(suspect: boolean, seq: number, t: number, changes: ConditionChange[], events: DomainEvent[]): void {
    if (!ssSettings) return;
    ssBits = ((ssBits << 1) | (suspect ? 1 : 0)) & ssMask;
    const n = popcount(ssBits);
    const now = n >= ssSettings.count;
    if (now === ssActive) return;
    ssActive = now;
    const { count, window } = ssSettings;
    const message = now
      ? `repeated suspect scans: ${n} of the last ${window} spectra were single points beyond a limit that raised no alarm on their own (alarm at ${count} in ${window}); check the probe and the analyzer (fouling, fibre, lamp, bubbles)`
      : `repeated suspect scans over: ${n} of the last ${window} spectra suspect (below ${count})`;
    const change: ConditionChange = { kind: 'analyzer', key: REPEATED_SUSPECT_KEY, active: now, message, value: n, limit: count, priority: 3 };
    changes.push(change);
    events.push({ type: 'condition', change, t, seq });
  }

  function activeKeys(): string[] {
    const keys: string[] = [];
    for (const c of conds) if (c.filter.active) keys.push(c.key);
    if (qualityFilter.active) keys.push(PIXEL_QUALITY_KEY);
    if (ssActive) keys.push(REPEATED_SUSPECT_KEY);
    return keys;
  }

  /** The result of a spectrum too damaged to judge: nothing but the analyzer-quality condition moves. */
  function notJudged(seq: number, t: number, quality: SpectrumQuality): MonitorResult {
    const changes: ConditionChange[] = [];
    const events: DomainEvent[] = [];
    qualityCondition(quality.badPixels, quality, seq, t, changes, events);
    lastSeq = seq;
    lastT = t;
    const nan = (): number[] => new Array<number>(A).fill(NaN);
    const ep: EndpointStatus = lastEndpoint
      ? { ...lastEndpoint, criteria: lastEndpoint.criteria, etaMin: lastEndpoint.etaMin ? { ...lastEndpoint.etaMin } : null }
      : { state: endpoint.state, criteria: [], combine: rule.combine, confirmCount: 0, confirmNeeded: rule.confirm, etaMin: null, doneAt: null };
    return {
      seq,
      t,
      elapsedMin: (t - batchStartT) / 60000,
      progress: lastProgress,
      progressFraction: lastProgressFraction,
      scores: nan(),
      t2: NaN,
      q: NaN,
      combined: NaN,
      limits: { t2: t2Lim, q: qLim, combined: cLim, confidence: conf },
      localLimits: null,
      alarmLimits: { t2: NaN, q: NaN, envelopeK: aK, confidence: aConf },
      envelope: [],
      prediction: null,
      suspect: false,
      conditionChanges: changes,
      activeConditions: activeKeys(),
      endpoint: ep,
      events,
      quality,
    };
  }

  function check(values: ArrayLike<number>): void {
    if (values.length !== pIn) throw new RangeError(`spectrum has ${values.length} values; the model ${model.id} expects ${pIn} on its axis`);
  }

  function push(seq: number, t: number, values: Float32Array | ArrayLike<number>): MonitorResult {
    check(values);
    if (!Number.isFinite(t)) throw new RangeError(`spectrum ${seq}: time ${t} is not a number`);
    let src: ArrayLike<number> = values;
    let quality: SpectrumQuality | undefined;
    let bad = 0;
    if (checker && pqSettings) {
      const pq = checker.check(values);
      bad = pq.bad;
      if (bad > 0) {
        const pixels: number[] = [];
        for (let j = 0; j < pIn && pixels.length < 32; j++) if (pq.mask[j]) pixels.push(j);
        quality = { flags: { ...pq.counts }, badPixels: bad, badFraction: pq.badFraction, pixels, missingVariables: 0, judged: false, scoredBy: null };
        if (pq.badFraction > pqSettings.maxBadFraction) {
          quality.reason = `${bad} of ${pIn} pixels are bad (${flagText(quality)}); more than ${+(pqSettings.maxBadFraction * 100).toFixed(2)} % are not judged`;
          return notJudged(seq, t, quality);
        }
        bridgeBadPixels(values, pq.mask, bridged);
        src = bridged;
        quality.missingVariables = footprint.missingVariables(pq.mask, bridged, missing);
      }
    }
    chain.apply(src, xp);
    let t2: number;
    let q: number;
    let scoreVec: Float64Array;
    if (quality && quality.missingVariables > 0) {
      const r = tsr.project(xp, missing);
      if (!r.ok) {
        quality.reason = `the model cannot estimate its ${A} scores with ${quality.missingVariables} of its ${p} variables missing`;
        return notJudged(seq, t, quality);
      }
      t2 = r.t2;
      q = r.q;
      scoreVec = r.scores;
      quality.scoredBy = 'tsr';
    } else {
      const r = projector.project(xp);
      t2 = r.t2;
      q = r.q;
      scoreVec = r.scores;
      if (quality) quality.scoredBy = 'full';
    }
    if (quality) quality.judged = true;
    const scores = Array.from(scoreVec);
    const combined = combinedIndex(t2, q, t2Lim, qLim);
    const elapsedMin = (t - batchStartT) / 60000;
    let prediction: MonitorResult['prediction'] = null;
    if (pls) {
      const r = pls.predict(src);
      prediction = { name: pls.name, unit: pls.unit, value: r.y, t2: r.t2, q: r.q, extrapolating: r.extrapolating };
    }
    const indicator = env.axis.kind === 'indicator' ? (env.axis.source === 'property' ? (prediction ? prediction.value : NaN) : scores[0]) : 0;
    const prog = progress.push(elapsedMin, indicator);
    const k = gridIndex(env, prog);
    const localT2 = env.t2Limit[k];
    const localQ = env.qLimit[k];
    const alarmT2 = useLocal ? aT2Local[k] : aT2;
    const alarmQ = useLocal ? aQLocal[k] : aQ;

    // A PC is judged against its envelope only where enough golden batches passed and their spread
    // is known; elsewhere (and for the progress indicator PC) it is 'unjudged', neither in nor out.
    const envelope: EnvelopeCheck[] = new Array(A);
    const enoughBatches = env.count[k] >= minBatches;
    for (let a = 0; a < A; a++) {
      const pc = env.pcs[a];
      const expected = pc.mean[k];
      const sd = pc.sd[k];
      const s = scores[a];
      const z = sd > 0 && Number.isFinite(sd) ? (s - expected) / sd : null;
      const status = a === indicatorPc || !enoughBatches || z === null ? 'unjudged' : s > pc.upper[k] ? 'above' : s < pc.lower[k] ? 'below' : 'inside';
      envelope[a] = { pc: a + 1, score: s, expected, lower: pc.lower[k], upper: pc.upper[k], status, sd: z };
    }

    // Pace: judged after start-up, up to the golden end progress — after 'done' too (a batch called
    // done early that then dries slowly is still slow); a pace alarm standing there stays standing.
    let paceStatus: PaceStatus | null = null;
    if (pace && elapsedMin >= startupMin && prog < endProgress) paceStatus = pace.update(k, elapsedMin);

    // Conditions.
    const events: DomainEvent[] = [];
    const changes: ConditionChange[] = [];
    const active: string[] = [];
    let suspect = false;
    for (let c = 0; c < conds.length && elapsedMin >= startupMin; c++) {
      const cd = conds[c];
      let value: number;
      let limit: number;
      if (c === 0) { value = t2; limit = alarmT2; }
      else if (c === 1) { value = q; limit = alarmQ; }
      else if (c < firstEnv) { value = al ? combinedIndex(t2, q, aT2, aQ) : combined; limit = aC; }
      else if (c === paceCond) {
        // Unjudged pace (past the golden end progress, or too few golden batches for the stretch)
        // says nothing about it: a slow batch stays flagged to its end, past its endpoint call too.
        if (paceStatus === null) {
          if (cd.filter.active) active.push(cd.key);
          continue;
        }
        value = paceStatus.z > 0 ? paceStatus.z : 0;
        limit = paceK;
      }
      else {
        // An unjudged point says nothing about the condition: it neither raises nor clears it (a
        // batch running past the golden batches' course keeps a standing envelope alarm).
        const e = envelope[condPc[c]];
        if (e.status === 'unjudged' || e.sd === null) {
          if (cd.filter.active) active.push(cd.key);
          continue;
        }
        value = Math.abs(e.sd);
        limit = aK;
      }
      const u = cd.filter.update(value, limit);
      if (u.suspect) suspect = true;
      if (u.active) active.push(cd.key);
      if (u.changed) {
        let what: string;
        if (c === paceCond) {
          what = `pace: ${fmt(paceStatus!.tookMin)} min without reaching the next progress point; the golden batches took ${fmt(paceStatus!.expectedMin)} min (alarm beyond ${fmt(paceStatus!.upperMin)} min, ${confPct})`;
        } else if (c >= firstEnv) {
          const e = envelope[condPc[c]];
          what = `${cd.label} score ${fmt(e.score)} is ${fmt(e.sd!)} sd from the golden path (alarm at ±${fmt(aK)} sd, ${confPct})`;
        } else what = `${cd.label} ${fmt(value)} ${u.active ? 'above' : 'below'} its ${confPct} limit ${fmt(limit)}`;
        const change: ConditionChange = { kind: cd.kind, key: cd.key, active: u.active, message: u.active ? what : `${cd.label} back within limits: ${what}`, value, limit, priority: cd.priority };
        standing[c] = u.active ? `${cd.label} alarm standing since ${fmt(elapsedMin)} min (${what})` : null;
        changes.push(change);
        events.push({ type: 'condition', change, t, seq });
      }
    }

    if (checker) qualityCondition(bad, quality, seq, t, changes, events);
    if (qualityFilter.active) active.push(PIXEL_QUALITY_KEY);
    suspectCondition(suspect, seq, t, changes, events);
    if (ssActive) active.push(REPEATED_SUSPECT_KEY);

    // Endpoint.
    inputs.property = prediction ? prediction.value : null;
    inputs.mbsd = mbsd ? mbsd.push(xp) : null;
    for (let i = 0; i < plateaus.length; i++) inputs.slopes[i] = plateaus[i].win.push(elapsedMin, scores[plateaus[i].pc]);
    if (needsEnd) {
      let d = 0;
      for (let a = 0; a < A; a++) {
        const z = endSd[a] > 0 ? (scores[a] - endMean[a]) / endSd[a] : 0;
        d += z * z;
      }
      inputs.goldenEndDistance = d;
    }
    inputs.eta = endpoint.state === 'done' || endpoint.state === 'signalled' ? null : eta.estimate(k, elapsedMin);
    inputs.elapsedMin = elapsedMin;
    // Guards: the confirmed alarms standing (T², Q, combined index, envelope; not pace — a slow
    // batch that reaches its endpoint is done), and the prediction's calibration flag.
    const alarmsNow = inputs.standingAlarms!;
    alarmsNow.length = 0;
    for (let c = 0; c < conds.length; c++) if (c !== paceCond && conds[c].filter.active && standing[c] !== null) alarmsNow.push(standing[c]!);
    inputs.extrapolating = prediction ? prediction.extrapolating : null;
    const ep = endpoint.update(seq, t, inputs, events);
    lastSeq = seq;
    lastT = t;
    lastProgress = prog;
    const fraction = progressFraction(env, prog, endProgress);
    lastProgressFraction = fraction;
    const endpointStatus: EndpointStatus = { ...ep, criteria: ep.criteria, etaMin: ep.etaMin ? { ...ep.etaMin } : null };
    lastEndpoint = endpointStatus;

    return {
      seq,
      t,
      elapsedMin,
      progress: prog,
      progressFraction: fraction,
      scores,
      t2,
      q,
      combined,
      limits: { t2: t2Lim, q: qLim, combined: cLim, confidence: conf },
      localLimits: { t2: localT2, q: localQ },
      alarmLimits: { t2: alarmT2, q: alarmQ, envelopeK: aK, confidence: aConf },
      ...(pace ? { pace: paceStatus } : {}),
      envelope,
      prediction,
      suspect,
      conditionChanges: changes,
      activeConditions: active,
      endpoint: endpointStatus,
      events,
      ...(quality ? { quality } : {}),
    };
  }

  function contributions(values: Float32Array | ArrayLike<number>): Contributions {
    check(values);
    chain.apply(values, xc);
    const c = pcaContributions(pca, xc);
    const axis = Array.from(chain.outputAxis);
    const regions = sumByRegion(axis, [c.t2, c.q, c.t2.map(Math.abs)]).map((r) => ({ name: r.region.name, from: r.region.from, to: r.region.to, assignment: r.region.assignment, t2: r.sums[0], q: r.sums[1], t2Abs: r.sums[2] }));
    return { axis, t2: Array.from(c.t2), q: Array.from(c.q), rbcT2: Array.from(c.rbcT2), rbcQ: Array.from(c.rbcQ), regions };
  }

  function markSignalled(t: number): DomainEvent | null {
    return endpoint.markSignalled(Number.isFinite(t) ? t : lastT, lastSeq);
  }

  return { push, contributions, markSignalled };
}

/** Replay stored spectra through a new monitor (state rebuild after a restart, review, evaluation). */
export function replayBatch(model: MonitoringModel, batchStartT: number, spectra: { seq: number; t: number; values: ArrayLike<number> }[], opts: BatchMonitorOptions = {}): { monitor: BatchMonitor; results: MonitorResult[] } {
  const monitor = createBatchMonitor(model, batchStartT, opts);
  const results = spectra.map((s) => monitor.push(s.seq, s.t, s.values));
  return { monitor, results };
}

function popcount(x: number): number {
  let c = 0;
  while (x) { x &= x - 1; c++; }
  return c;
}
