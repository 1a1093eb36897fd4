/**
 * The endpoint rule's automatic thresholds, resolved from the reference batches at their known
 * endpoints only (core/model/reference-endpoints.ts; never at the last spectrum by assumption):
 *
 * - moving-block SD 'auto': the smallest MBSD (Sekulic et al. 1996, Anal. Chem. 68:509) among the
 *   reference batches over the block that ends at their endpoint;
 * - plateau 'auto': the smallest |slope| of the PC score over the window that ends at the endpoint;
 * - golden end: the end region from the scores at the known endpoints (core/envelope).
 *
 * Smallest, not median: both quantities fall as a batch approaches its end, so with the smallest
 * value no reference batch would meet the threshold before its own endpoint were it to fall
 * steadily; a median would be met early by about half of them. This choice is ours (no published
 * rule), made to err late: a dryer stopped a little late costs little, one stopped early leaves wet
 * product. The leave-one-batch-out check at build (core/model/endpoint-check.ts) measures what it
 * gives. Each threshold can be re-resolved without one batch, for that check.
 */
import normalQuantile from '@stdlib/stats-base-dists-normal-quantile';
import type { EndpointRuleSpec, ResolvedCriterion } from '../endpoint/spec.ts';
import { goldenEndRegion, type Envelope } from '../envelope/envelope.ts';
import { movingBlockSd } from '../envelope/mbsd.ts';
import { plateauSlope } from '../endpoint/plateau.ts';
import { newObservationMultiplier } from '../envelope/band.ts';

/** Per reference batch, what the automatic thresholds are calibrated from (null: no known endpoint, or too few spectra before it). */
export interface EndValues {
  /** Per criterion of the rule (same order): MBSD or |slope| at each batch's endpoint; null for other kinds. */
  perCriterion: ((number | null)[] | null)[];
  /** PCA scores at each batch's endpoint. */
  endScores: (number[] | null)[];
  /** Minutes from each batch's first spectrum to its known endpoint. */
  endMin: (number | null)[];
  /**
   * Minutes from each batch's first spectrum to the earliest its endpoint can have come (see
   * CalibrationBatch.earliestEndMin); the basis of the automatic minimum time.
   */
  earliestMin: (number | null)[];
  batchIds: string[];
}

export interface CalibrationBatch {
  /** Preprocessed spectra (model chain) of the batch's kept spectra. */
  rows: ArrayLike<number>[];
  elapsedMin: ArrayLike<number>;
  /** scores[a][i] */
  scores: ArrayLike<number>[];
  /** Kept-spectrum index of the known endpoint, or null. */
  endIndex: number | null;
  /**
   * Minutes from the first spectrum to the earliest the endpoint can have come: for an endpoint
   * placed from lab values, the time of the last lab value not yet past the target before the
   * crossing (0 when the first lab value was already past it); for a marked endpoint, the mark.
   * Absent: the known endpoint's own time.
   */
  earliestEndMin?: number | null;
}

export function endValuesOf(rule: EndpointRuleSpec, batches: CalibrationBatch[], batchIds: string[]): EndValues {
  const perCriterion = rule.criteria.map((c) => {
    if (c.kind === 'mbsd' && c.threshold === 'auto') {
      return batches.map((b) => {
        if (b.endIndex === null || b.endIndex + 1 < c.block) return null;
        const from = b.endIndex - c.block + 1;
        const sd = movingBlockSd(b.rows.slice(from, b.endIndex + 1), c.block);
        return sd.length ? sd[0]! : null;
      });
    }
    if (c.kind === 'plateau' && c.tolerance === 'auto') {
      return batches.map((b) => {
        if (b.endIndex === null || b.endIndex + 1 < c.window || c.pc > b.scores.length) return null;
        return Math.abs(plateauSlope(b.elapsedMin, b.scores[c.pc - 1]!, b.endIndex - c.window + 1, c.window));
      });
    }
    return null;
  });
  const endScores = batches.map((b) => (b.endIndex === null ? null : b.scores.map((s) => s[b.endIndex!]!)));
  const endMin = batches.map((b) => (b.endIndex === null ? null : b.elapsedMin[b.endIndex]!));
  const earliestMin = batches.map((b, bi) => (b.endIndex === null ? null : Math.min(b.earliestEndMin ?? endMin[bi]!, endMin[bi]!)));
  return { perCriterion, endScores, endMin, earliestMin, batchIds };
}

const sig = (v: number) => (Math.abs(v) >= 100 ? v.toFixed(1) : v.toPrecision(3));

/** Context the property criterion needs. */
export interface PropertyContext {
  name: string;
  unit: string;
  target?: number;
  direction?: 'below' | 'above';
  /** RMSECV at the model's LV count (for margin 'auto'). */
  rmsecv: number | null;
  /**
   * The lab (reference) method's standard deviation of one result, in the property's unit
   * (settings.property.labSd); absent: the margin takes RMSECV as it is.
   */
  labSd?: number;
  /** Lab values the RMSECV was computed from (for the floor of the corrected error). */
  nLab?: number;
}

/**
 * The error of the property prediction against the TRUE property, for the automatic margin.
 * RMSECV compares predictions with lab values, which carry the lab method's own error: with the
 * prediction error and the lab error independent, RMSECV² ≈ σ²_prediction + s²_lab (the usual
 * decomposition of NIR practice: DiFoggio 1995, Appl. Spectrosc. 49:67, "Examination of some
 * misconceptions about near-infrared analysis"; Faber & Kowalski 1997, Appl. Spectrosc. 51:660,
 * correcting prediction-error estimates for the error of the reference values — both from memory).
 * Without `labSd` the margin takes RMSECV whole (as before this setting). With it,
 * σ_prediction = √max(RMSECV² − s²_lab, floor): the floor is one standard error of RMSECV² itself,
 * RMSECV²·√(2/n) (the standard deviation of a mean of n squared normal residuals, var = 2σ⁴/n; the
 * residuals of a batch-grouped cross-validation are not fully independent, so this understates the
 * uncertainty somewhat): a difference smaller than that cannot be told from zero, and the margin is
 * not thinned below what the n lab values can show. The floor is our rule, not a published one.
 */
export function predictionErrorForMargin(rmsecv: number, labSd: number | undefined, nLab: number | undefined, unit: string): { sd: number; text: string } {
  const u = unit ? ` ${unit}` : '';
  if (labSd === undefined) return { sd: rmsecv, text: `RMSECV ${rmsecv.toPrecision(3)}${u} (lab values' own error included; no lab sd stated)` };
  if (!(labSd >= 0) || !Number.isFinite(labSd)) throw new RangeError(`property lab sd ${labSd}: must be a finite number ≥ 0`);
  const n = nLab ?? 0;
  if (n < 2) throw new RangeError(`property lab sd: the corrected prediction error needs the number of lab values behind RMSECV (got ${n})`);
  const r2 = rmsecv * rmsecv;
  const diff = r2 - labSd * labSd;
  const floor = r2 * Math.sqrt(2 / n);
  const sd = Math.sqrt(Math.max(diff, floor));
  const f = (v: number) => v.toPrecision(3);
  const text =
    `√max(RMSECV² − s²_lab, RMSECV²·√(2/n)) = √max(${f(rmsecv)}² − ${f(labSd)}², ${f(r2)}·√(2/${n})) = ${f(sd)}${u}` +
    (diff >= floor
      ? ` (the lab method's stated sd ${f(labSd)}${u} taken out of RMSECV ${f(rmsecv)}${u})`
      : ` (floor: RMSECV² − s²_lab = ${diff.toPrecision(2)} is within one standard error of RMSECV² from ${n} lab values, so the lab sd ${f(labSd)}${u} is not taken out in full)`);
  return { sd, text };
}

/**
 * The rule's criteria with every threshold a number and how it was obtained. `exclude`: a batch
 * index left out (the leave-one-batch-out check); null for the model itself.
 */
export function resolveCriteria(
  rule: EndpointRuleSpec,
  ev: EndValues,
  opts: { A: number; confidence: number; property: PropertyContext | null; exclude: number | null },
): { criteria: ResolvedCriterion[]; endRegion: Envelope['endRegion']; minElapsed: { value: number; method: string } | null } {
  const { A, confidence, property, exclude } = opts;
  const keep = (b: number) => b !== exclude;
  let endRegion: Envelope['endRegion'] = null;
  const criteria = rule.criteria.map((c, ci): ResolvedCriterion => {
    switch (c.kind) {
      case 'property': {
        if (!property) throw new RangeError('endpoint criterion "property" needs a property model (settings.property)');
        const target = c.target ?? property.target;
        if (target === undefined) throw new RangeError('endpoint criterion "property" needs a target (criterion.target or property.target)');
        const base = { kind: 'property' as const, target, direction: c.direction ?? property.direction ?? 'below', name: property.name, unit: property.unit };
        if (c.margin === undefined || c.margin === 0) return base;
        if (c.margin !== 'auto') return { ...base, margin: c.margin, marginMethod: 'fixed by the model owner' };
        const rmsecv = property.rmsecv;
        if (rmsecv === null || !Number.isFinite(rmsecv)) throw new RangeError('endpoint criterion "property": margin "auto" needs the cross-validated error of the property model');
        const mc = c.marginConfidence ?? confidence;
        const z = normalQuantile(mc, 0, 1);
        if (property.labSd === undefined) return { ...base, margin: z * rmsecv, marginMethod: `z(${mc})·RMSECV = ${z.toFixed(3)} × ${rmsecv.toPrecision(3)} ${property.unit} (one-sided bound on the prediction error; RMSECV includes the lab values' own error, no lab sd stated)` };
        const pe = predictionErrorForMargin(rmsecv, property.labSd, property.nLab, property.unit);
        return { ...base, margin: z * pe.sd, marginMethod: `z(${mc})·σ_prediction = ${z.toFixed(3)} × ${pe.sd.toPrecision(3)} ${property.unit} (one-sided bound on the prediction error against the true ${property.name}); σ_prediction = ${pe.text}` };
      }
      case 'mbsd': {
        if (c.threshold !== 'auto') return { kind: 'mbsd', block: c.block, threshold: c.threshold, method: 'fixed by the model owner' };
        const vals = ev.perCriterion[ci]!.map((v, b) => ({ v, b })).filter((x): x is { v: number; b: number } => x.v !== null && keep(x.b));
        if (vals.length === 0) throw new RangeError(`moving-block SD criterion: no reference batch${exclude !== null ? ` (without "${ev.batchIds[exclude]}")` : ''} has ${c.block} spectra up to a known endpoint`);
        const low = vals.reduce((m, x) => (x.v < m.v ? x : m));
        return { kind: 'mbsd', block: c.block, threshold: low.v, method: `'auto': the smallest MBSD over the ${c.block} spectra up to the known endpoint among ${vals.length} reference batches (${sig(low.v)}, batch "${ev.batchIds[low.b]}")` };
      }
      case 'plateau': {
        if (c.pc > A) throw new RangeError(`plateau criterion uses PC${c.pc} but the model has ${A} components`);
        if (c.tolerance !== 'auto') return { kind: 'plateau', pc: c.pc, window: c.window, tolerance: c.tolerance, method: 'fixed by the model owner' };
        const vals = ev.perCriterion[ci]!.map((v, b) => ({ v, b })).filter((x): x is { v: number; b: number } => x.v !== null && keep(x.b));
        if (vals.length === 0) throw new RangeError(`plateau criterion: no reference batch${exclude !== null ? ` (without "${ev.batchIds[exclude]}")` : ''} has ${c.window} spectra up to a known endpoint`);
        const low = vals.reduce((m, x) => (x.v < m.v ? x : m));
        return { kind: 'plateau', pc: c.pc, window: c.window, tolerance: low.v, method: `'auto': the smallest |slope| of PC${c.pc} per minute over the ${c.window} spectra up to the known endpoint among ${vals.length} reference batches (${sig(low.v)}, batch "${ev.batchIds[low.b]}")` };
      }
      case 'golden-end': {
        const end = ev.endScores.filter((s, b): s is number[] => s !== null && keep(b));
        const region = goldenEndRegion(end, A, confidence);
        if (!region) throw new RangeError(`golden end region: needs at least 2 reference batches with a known endpoint${exclude !== null ? ` besides "${ev.batchIds[exclude]}"` : ''}`);
        endRegion = region;
        return { kind: 'golden-end', limit: region.limit, method: region.method };
      }
    }
  });
  let minElapsed: { value: number; method: string } | null = null;
  if (typeof rule.minElapsedMin === 'number') minElapsed = { value: rule.minElapsedMin, method: 'set by the model owner' };
  else if (rule.minElapsedMin === 'auto') {
    const idx = ev.earliestMin.flatMap((v, b) => (v !== null && keep(b) ? [b] : []));
    // Said so the form can act on it: in the leave-one-batch-out check one batch is left out, so
    // two reference batches with known endpoints are not enough.
    if (idx.length < 2) {
      const known = ev.earliestMin.filter((v) => v !== null).length;
      throw new RangeError(
        `minimum time 'auto' needs the known endpoints of at least 2 reference batches${exclude !== null ? ` besides "${ev.batchIds[exclude]}", which the leave-one-batch-out check of the rule leaves out` : ''}; ${known} of the ${ev.batchIds.length} have one. Give the minimum time in minutes (or none), or choose ${exclude !== null ? 'at least 3' : 'at least 2'} reference batches with a known endpoint`,
      );
    }
    minElapsed = autoMinElapsed(idx.map((b) => ev.earliestMin[b]!), confidence, idx.map((b) => ev.batchIds[b]!));
  }
  return { criteria, endRegion, minElapsed };
}

/**
 * The automatic minimum time before an endpoint may be called (endpoint rule `minElapsedMin:
 * 'auto'`), from E_i, the EARLIEST each reference batch can have reached its endpoint (minutes from
 * its first spectrum; EndValues.earliestMin). Endpoints placed from lab values lie at or after the
 * true crossing (the first lab value past the target comes after it, and on a flattening drying
 * curve the interpolation between two lab values does too), so a bound taken from them holds good
 * batches past their true endpoint; the last lab value not yet past the target comes before the
 * crossing (up to the lab error), so a bound from it does not. The bound is the lower one-sided
 * prediction bound for one new batch at the model's confidence, taken on ln E (positive, skewed to
 * the right) — exp(mean(ln E) − t(confidence; I − 1)·s·√(1 + 1/I)), s the sd of ln E (n − 1), the
 * prediction interval for a single future observation from a normal sample (as the envelope's
 * prediction band, core/envelope/band.ts) — and never above the shortest E_i, so that no reference
 * batch would be held past the earliest its endpoint can have come. When a batch's endpoint can have
 * come at its start (its first lab value already past the target), the minimum is 0 and says why.
 * `batchIds` (same order) name the batches in the method text.
 */
export function autoMinElapsed(earliestMin: number[], confidence: number, batchIds?: string[]): { value: number; method: string } {
  const I = earliestMin.length;
  if (I < 2) throw new RangeError(`minimum time 'auto': needs the known endpoints of at least 2 reference batches (got ${I})`);
  for (const t of earliestMin) if (!(t >= 0) || !Number.isFinite(t)) throw new RangeError(`minimum time 'auto': an earliest endpoint at ${t} min; every endpoint must lie at or after the batch start`);
  const basis = `the earliest each of the ${I} reference batches can have reached its endpoint (lab-placed: the last lab value not yet past the target; marked: the mark)`;
  const zero = earliestMin.findIndex((t) => t === 0);
  if (zero >= 0) {
    const who = batchIds?.[zero] !== undefined ? `reference batch "${batchIds[zero]}"` : 'a reference batch';
    return { value: 0, method: `'auto' from ${basis}: 0 min — ${who} can have reached its endpoint at its start (its first lab value was already past the target), so no minimum is known` };
  }
  const logs = earliestMin.map(Math.log);
  const m = logs.reduce((a, b) => a + b, 0) / I;
  const s = Math.sqrt(logs.reduce((a, b) => a + (b - m) ** 2, 0) / (I - 1));
  const k = newObservationMultiplier(confidence, I);
  const bound = Math.exp(m - k * s);
  const shortest = Math.min(...earliestMin);
  const value = Math.min(bound, shortest);
  const f = (v: number) => v.toFixed(1);
  return {
    value,
    method: `'auto': lower one-sided ${+(confidence * 100).toFixed(3)} % prediction bound for one new batch's endpoint time from ${basis}, on ln(time): exp(mean − t(${confidence}; ${I - 1})·s·√(1 + 1/${I})) = ${f(bound)} min${bound > shortest ? `, capped at the shortest of them ${f(shortest)} min` : ` (shortest of them ${f(shortest)} min)`}`,
  };
}
