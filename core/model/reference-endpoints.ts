/**
 * Where each reference batch really reached its endpoint — known, never assumed. Operators stop a
 * batch late, so the last spectrum is no endpoint unless the model owner says so (`last: true`).
 *
 * 1. A mark of the model owner (settings.referenceEndpoints: by spectrum index, by elapsed minutes,
 *    or `last: true`) decides for its batch.
 * 2. Otherwise lab values crossing the target: the first lab value past the target and the lab
 *    value before it bracket the crossing. The endpoint is placed by linear interpolation in time
 *    between those two values, at the first spectrum at or after the interpolated time; the bracket
 *    is kept as its uncertainty. On a drying curve that flattens as it goes (convex, falling) the
 *    straight line between two lab values lies above the curve, so the interpolated time is no
 *    earlier than the true crossing: the placement errs late, which makes the endpoint check
 *    (an earlier call counts as early) and the thresholds calibrated at the endpoint err on the
 *    safe side. When the first lab value is already past the target, the endpoint is placed at it
 *    and the bracket starts at the batch start.
 * 3. Otherwise the batch has no known endpoint.
 */
import type { BuildSettings } from './build-settings.ts';

export interface ReferenceEndpoint {
  batch: string;
  /** Spectrum index in the batch as given (before any exclusions). */
  index: number;
  /** Minutes from the batch's first spectrum to the endpoint spectrum. */
  elapsedMin: number;
  source: 'lab' | 'marked' | 'marked-last';
  /** How it was found, in words. */
  detail: string;
  /** Lab endpoints: the two lab values around the crossing (from: the last not past the target, or the batch start). */
  bracket?: { fromIndex: number; toIndex: number; fromMin: number; toMin: number };
}

interface BatchLike {
  id: string;
  times: ArrayLike<number>;
  property?: ArrayLike<number>;
}

/** The target a lab value must cross: the property criterion's own, else the property model's. */
export function endpointTarget(settings: BuildSettings): { target: number; direction: 'below' | 'above'; name: string; unit: string } | null {
  const p = settings.property;
  if (!p) return null;
  const crit = settings.endpoint.criteria.find((c) => c.kind === 'property');
  const target = (crit && crit.kind === 'property' ? crit.target : undefined) ?? p.target;
  if (target === undefined) return null;
  const direction = (crit && crit.kind === 'property' ? crit.direction : undefined) ?? p.direction ?? 'below';
  return { target, direction, name: p.name, unit: p.unit };
}

const fmt = (v: number, d = 1) => v.toFixed(d);
const sig = (v: number) => (Math.abs(v) >= 100 ? v.toFixed(1) : Math.abs(v) >= 1 ? v.toFixed(2) : v.toPrecision(3));

/** First index with times[i] ≥ t (the last index when none). */
function firstAtOrAfter(times: ArrayLike<number>, t: number): number {
  for (let i = 0; i < times.length; i++) if (times[i]! >= t) return i;
  return times.length - 1;
}

/** The endpoint from lab values crossing the target, or why there is none. */
function labEndpoint(b: BatchLike, tgt: NonNullable<ReturnType<typeof endpointTarget>>): ReferenceEndpoint | string {
  if (!b.property) return `no lab values of ${tgt.name}`;
  const t0 = b.times[0]!;
  const min = (i: number) => (b.times[i]! - t0) / 60000;
  const past = (v: number) => (tgt.direction === 'below' ? v <= tgt.target : v >= tgt.target);
  let prev = -1;
  let count = 0;
  let last = -1;
  for (let i = 0; i < b.property.length; i++) {
    const v = b.property[i]!;
    if (!Number.isFinite(v)) continue;
    count++;
    last = i;
    if (!past(v)) {
      prev = i;
      continue;
    }
    const u = tgt.unit ? ` ${tgt.unit}` : '';
    const targetText = `the ${sig(tgt.target)}${u} target`;
    if (prev < 0) {
      return {
        batch: b.id, index: i, elapsedMin: min(i), source: 'lab',
        detail: `the first lab value of ${tgt.name} (${sig(v)}${u} at ${fmt(min(i))} min) is already past ${targetText}: endpoint placed at it, bracket from the batch start`,
        bracket: { fromIndex: 0, toIndex: i, fromMin: 0, toMin: min(i) },
      };
    }
    const vp = b.property[prev]!;
    const tp = b.times[prev]!;
    const ti = b.times[i]!;
    const tStar = vp === v ? ti : tp + ((ti - tp) * (vp - tgt.target)) / (vp - v);
    const idx = Math.min(i, Math.max(prev + 1, firstAtOrAfter(b.times, tStar)));
    return {
      batch: b.id, index: idx, elapsedMin: min(idx), source: 'lab',
      detail: `lab ${tgt.name} ${sig(vp)}${u} at ${fmt(min(prev))} min and ${sig(v)}${u} at ${fmt(min(i))} min bracket ${targetText}; endpoint placed by linear interpolation in time at ${fmt((tStar - t0) / 60000)} min (spectrum ${idx}, the first at or after it)`,
      bracket: { fromIndex: prev, toIndex: i, fromMin: min(prev), toMin: min(i) },
    };
  }
  if (count === 0) return `no lab values of ${tgt.name}`;
  return `its ${count} lab value${count === 1 ? '' : 's'} of ${tgt.name} never reach${count === 1 ? 'es' : ''} the ${sig(tgt.target)}${tgt.unit ? ` ${tgt.unit}` : ''} target (last ${sig(b.property[last]!)} at ${fmt(min(last))} min)`;
}

/**
 * For a batch whose lab values never cross the target (and that has no mark): where its last lab
 * value, not yet past the target, says the endpoint had not come — the endpoint lies after that
 * spectrum, so a rule calling done at or before it is early. Null when the batch has no lab values,
 * when one crosses the target, or when there is no property target.
 */
export function labNotYetPast(b: BatchLike, settings: BuildSettings): { index: number; value: number; text: string } | null {
  const tgt = endpointTarget(settings);
  if (!tgt || !b.property) return null;
  const past = (v: number) => (tgt.direction === 'below' ? v <= tgt.target : v >= tgt.target);
  let last = -1;
  for (let i = 0; i < b.property.length; i++) {
    const v = b.property[i]!;
    if (!Number.isFinite(v)) continue;
    if (past(v)) return null;
    last = i;
  }
  if (last < 0) return null;
  const u = tgt.unit ? ` ${tgt.unit}` : '';
  const v = b.property[last]!;
  return { index: last, value: v, text: `lab ${tgt.name} ${sig(v)}${u} at ${fmt((b.times[last]! - b.times[0]!) / 60000)} min, not yet past the ${sig(tgt.target)}${u} target` };
}

/**
 * One entry per reference batch: its endpoint, or null with the reason in `missing`. Marks naming
 * an unknown batch, given twice, or outside the batch are refused with a sentence naming them.
 */
export function resolveReferenceEndpoints(batches: BatchLike[], settings: BuildSettings): { endpoints: (ReferenceEndpoint | null)[]; missing: Map<string, string> } {
  const marks = new Map<string, NonNullable<BuildSettings['referenceEndpoints']>[number]>();
  for (const m of settings.referenceEndpoints ?? []) {
    if (!batches.some((b) => b.id === m.batch)) throw new RangeError(`referenceEndpoints names batch "${m.batch}", which is not among the reference batches`);
    if (marks.has(m.batch)) throw new RangeError(`referenceEndpoints marks batch "${m.batch}" twice`);
    marks.set(m.batch, m);
  }
  const tgt = endpointTarget(settings);
  const missing = new Map<string, string>();
  const endpoints = batches.map((b): ReferenceEndpoint | null => {
    const n = b.times.length;
    const t0 = b.times[0]!;
    const min = (i: number) => (b.times[i]! - t0) / 60000;
    const lab = tgt ? labEndpoint(b, tgt) : 'no property target to read lab values against';
    const labText = typeof lab === 'string' ? '' : ` (lab values would place it at spectrum ${lab.index}, ${fmt(lab.elapsedMin)} min)`;
    const m = marks.get(b.id);
    if (m) {
      const note = m.note ? ` — ${m.note}` : '';
      if (m.last) return { batch: b.id, index: n - 1, elapsedMin: min(n - 1), source: 'marked-last', detail: `marked by the model owner as the last spectrum (${n - 1}, ${fmt(min(n - 1))} min)${labText}${note}` };
      if (m.index !== undefined) {
        if (m.index > n - 1) throw new RangeError(`referenceEndpoints: batch "${b.id}" has ${n} spectra; index ${m.index} is beyond its last (${n - 1})`);
        return { batch: b.id, index: m.index, elapsedMin: min(m.index), source: 'marked', detail: `marked by the model owner at spectrum ${m.index} (${fmt(min(m.index))} min)${labText}${note}` };
      }
      const e = m.elapsedMin!;
      if (e > min(n - 1)) throw new RangeError(`referenceEndpoints: batch "${b.id}" lasts ${fmt(min(n - 1))} min; elapsedMin ${e} is beyond its last spectrum`);
      const idx = firstAtOrAfter(b.times, t0 + e * 60000);
      return { batch: b.id, index: idx, elapsedMin: min(idx), source: 'marked', detail: `marked by the model owner at ${fmt(e)} min: spectrum ${idx} (${fmt(min(idx))} min), the first at or after it${labText}${note}` };
    }
    if (typeof lab !== 'string') return lab;
    missing.set(b.id, lab);
    return null;
  });
  return { endpoints, missing };
}

/** Which parts of the endpoint rule are calibrated at the reference batches' endpoints. */
export function partsNeedingEndpoints(settings: BuildSettings): string[] {
  const parts: string[] = [];
  for (const c of settings.endpoint.criteria) {
    if (c.kind === 'mbsd' && c.threshold === 'auto') parts.push("the moving-block SD threshold 'auto'");
    if (c.kind === 'plateau' && c.tolerance === 'auto') parts.push("the plateau tolerance 'auto'");
    if (c.kind === 'golden-end') parts.push('the golden end region');
  }
  if (settings.endpoint.minElapsedMin === 'auto') parts.push("the minimum time 'auto'");
  return parts;
}

/** The sentence of a refused build: which batches lack an endpoint, why, and how to give them. */
export function missingEndpointsMessage(parts: string[], missing: Map<string, string>, settings: BuildSettings): string {
  const list = [...missing.entries()].map(([b, why]) => `"${b}" (${why})`).join(', ');
  const tgt = endpointTarget(settings);
  const labWay = tgt ? `lab values of ${tgt.name} that cross the ${sig(tgt.target)}${tgt.unit ? ` ${tgt.unit}` : ''} target (a property column in the imported file, or POST /api/batches/:batch/lab-values)` : 'lab values crossing a property target (settings.property with a target, and lab values on the batches)';
  return (
    `the endpoint rule calibrates ${parts.join(' and ')} on the reference batches' known endpoints, and ${missing.size} reference batch${missing.size === 1 ? ' has' : 'es have'} none: ${list}. ` +
    `Give their endpoints — ${labWay}, or marks in settings.referenceEndpoints ({ "batch": …, "index": spectrum } or { "batch": …, "elapsedMin": minutes }; { "batch": …, "last": true } only if the last spectrum really is the endpoint) — or leave these batches out`
  );
}
