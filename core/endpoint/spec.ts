/**
 * Endpoint rule settings. Criteria (combinable with all / any), confirmed over N consecutive
 * spectra:
 * - property: PLS-predicted property crosses a target (e.g. moisture ≤ 2 % w/w);
 * - mbsd: moving-block standard deviation (Sekulic et al. 1996, Anal. Chem. 68:509) below a threshold;
 * - plateau: the least-squares slope of one PC score over the last `window` spectra, per minute,
 *   within ± tolerance;
 * - golden-end: the scores within the limit of the golden end region (Hotelling-type distance to
 *   the reference batches' scores at their endpoints).
 * 'auto' thresholds are resolved from the reference batches at model build and stored resolved.
 */
import { z } from 'zod';

const auto = z.literal('auto');

export const endpointCriterionSpecSchema = z.discriminatedUnion('kind', [
  /**
   * margin: the prediction must clear the target by this much (property units) — 'auto' takes
   * z(confidence)·RMSECV of the property model, a one-sided bound on the prediction error, so a
   * batch is called done only when its property is past the target with that confidence
   * (conservative release decision; the RMSECV from segments of whole batches carries the
   * batch-to-batch bias). Omitted: 0. marginConfidence: the one-sided confidence of the 'auto'
   * margin when it should differ from the model's confidence (e.g. 0.7: z = 0.52, about half the
   * RMSECV — a dryer called late by a spectrum or two costs little, one called early leaves wet product).
   */
  z.object({ kind: z.literal('property'), target: z.number().optional(), direction: z.enum(['below', 'above']).optional(), margin: z.union([z.number().nonnegative(), auto]).optional(), marginConfidence: z.number().gt(0.5).lt(1).optional() }),
  z.object({ kind: z.literal('mbsd'), block: z.number().int().min(2).max(50), threshold: z.union([z.number().positive(), auto]) }),
  z.object({ kind: z.literal('plateau'), pc: z.number().int().min(1), window: z.number().int().min(3).max(200), tolerance: z.union([z.number().positive(), auto]) }),
  z.object({ kind: z.literal('golden-end') }),
]);
export type EndpointCriterionSpec = z.infer<typeof endpointCriterionSpecSchema>;

export const endpointRuleSpecSchema = z.object({
  criteria: z.array(endpointCriterionSpecSchema).min(1),
  combine: z.enum(['all', 'any']),
  /** Consecutive spectra meeting the rule before 'done'. */
  confirm: z.number().int().min(1).max(100),
  /** 'nearing' once the estimated time to endpoint is at most this many minutes. */
  nearingMin: z.number().nonnegative(),
  /**
   * No 'done' before this many minutes from the batch start: a number, or 'auto' — resolved at
   * build from the reference batches' known endpoints (core/model/endpoint-calibration.ts
   * autoMinElapsed: a lower one-sided prediction bound on the endpoint time from the earliest each
   * reference batch can have reached its endpoint — for a lab-placed endpoint the last lab value not
   * yet past the target — never above the shortest of them). Omitted: no minimum.
   */
  minElapsedMin: z.union([z.number().finite().min(0).max(100_000), z.literal('auto')]).optional(),
  /**
   * Run-time guards that hold a met and confirmed rule in 'held' instead of 'done' (both on when
   * omitted): `alarms` — while a confirmed T², Q, combined-index or envelope condition of the
   * monitor stands; `extrapolation` — while the property prediction is outside its calibration
   * (rules with a property criterion). See core/endpoint/endpoint-tracker.ts.
   */
  hold: z.object({ alarms: z.boolean().optional(), extrapolation: z.boolean().optional() }).strict().optional(),
  /**
   * Hysteresis of the endpoint state, in consecutive spectra (default 3; 1: every spectrum
   * decides): a state steps back (settling or held → nearing) only after this many spectra in a
   * row fail the rule, 'running' becomes 'nearing' only after this many say so, and the
   * extrapolation hold is released only after this many predictions in a row inside calibration.
   */
  hysteresis: z.number().int().min(1).max(100).optional(),
});
export type EndpointRuleSpec = z.infer<typeof endpointRuleSpecSchema>;

/** The rule after build: every threshold a number, with how it was obtained (`method`, `marginMethod`; absent in older files). */
export type ResolvedCriterion =
  | { kind: 'property'; target: number; direction: 'below' | 'above'; name: string; unit: string; margin?: number; marginMethod?: string }
  | { kind: 'mbsd'; block: number; threshold: number; method?: string }
  | { kind: 'plateau'; pc: number; window: number; tolerance: number; method?: string }
  | { kind: 'golden-end'; limit: number; method?: string };
export interface ResolvedEndpointRule {
  criteria: ResolvedCriterion[];
  combine: 'all' | 'any';
  confirm: number;
  nearingMin: number;
  /** No 'done' before this many minutes from the batch start, and how the figure was obtained (absent in older files: none). */
  minElapsedMin?: number;
  minElapsedMethod?: string;
  /** Guards that hold a confirmed rule (absent in older files: both on). */
  hold?: { alarms: boolean; extrapolation: boolean };
  /** Consecutive spectra before a state change against the trend (absent in older files: DEFAULT_HYSTERESIS). */
  hysteresis?: number;
}

/** Hysteresis of the endpoint state when the rule does not set it, in spectra (common practice, no source: a short run that one noisy spectrum cannot make). */
export const DEFAULT_HYSTERESIS = 3;

/** The run-time parts of a rule spec, as stored in the resolved rule. */
export function resolvedGuards(spec: EndpointRuleSpec): Pick<ResolvedEndpointRule, 'hold' | 'hysteresis'> {
  return { hold: { alarms: spec.hold?.alarms ?? true, extrapolation: spec.hold?.extrapolation ?? true }, hysteresis: spec.hysteresis ?? DEFAULT_HYSTERESIS };
}

export function validateEndpointRuleSpec(spec: unknown): EndpointRuleSpec {
  const r = endpointRuleSpecSchema.safeParse(spec);
  if (!r.success) {
    const i = r.error.issues[0]!;
    throw new RangeError(`endpoint rule: ${i.path.join('.') || '(root)'}: ${i.message}`);
  }
  return r.data;
}
