/**
 * Settings of a monitoring-model build, validated with zod; omitted fields take the defaults below
 * (the server passes what the model owner chose). Defaults are common practice, not from a source:
 * 99 % limits, envelope mean ± 3 sd, alarms on 3 of 5 points out and off after 5 points back in,
 * judged against the per-progress-point limits, none in the first 2 minutes of a batch.
 */
import { z } from 'zod';
import { chainSpecSchema, type ChainSpec } from '../preprocess/index.ts';
import { endpointRuleSpecSchema, type EndpointRuleSpec } from '../endpoint/spec.ts';

export const buildSettingsSchema = z.object({
  name: z.string().min(1),
  product: z.string().min(1),
  author: z.string().min(1),
  createdAt: z.number().finite(),
  chain: chainSpecSchema,
  components: z.union([z.number().int().min(1).max(50), z.literal('auto')]),
  confidence: z.number().gt(0.5).lt(1),
  qMethod: z.enum(['jackson-mudholkar', 'box']).optional(),
  progress: z.discriminatedUnion('kind', [z.object({ kind: z.literal('time') }), z.object({ kind: z.literal('indicator'), source: z.enum(['pc1', 'property']) })]),
  envelope: z.object({ k: z.number().positive().max(10), smoothing: z.number().int().min(0).max(50), points: z.number().int().min(2).max(2000), band: z.enum(['sd', 'prediction']).optional() }),
  endpoint: endpointRuleSpecSchema,
  alarms: z.object({ onDelay: z.number().int().min(1).max(31), onWindow: z.number().int().min(1).max(31), offDelay: z.number().int().min(1).max(1000), deadband: z.number().min(0).lt(1), limits: z.enum(['global', 'local']).optional(), startupMin: z.number().min(0).max(600).optional(), confidence: z.number().gt(0.5).lt(1).optional(), pace: z.boolean().optional() }),
  property: z
    .object({
      name: z.string().min(1),
      unit: z.string(),
      components: z.union([z.number().int().min(1).max(30), z.literal('auto')]),
      target: z.number().finite().optional(),
      direction: z.enum(['below', 'above']).optional(),
      chain: chainSpecSchema.optional(),
      range: z.tuple([z.number().finite(), z.number().finite()]).optional(),
      extrapolationConfidence: z.number().gt(0.5).lt(1).optional(),
      labSd: z.number().finite().nonnegative().optional(),
    })
    .optional(),
  excludeSpectra: z.array(z.object({ batch: z.string(), index: z.number().int().min(0) })).optional(),
  referenceEndpoints: z
    .array(
      z
        .object({ batch: z.string().min(1), index: z.number().int().min(0).optional(), elapsedMin: z.number().finite().min(0).optional(), last: z.literal(true).optional(), note: z.string().max(500).optional() })
        .strict()
        .refine((m) => [m.index !== undefined, m.elapsedMin !== undefined, m.last === true].filter(Boolean).length === 1, { message: 'give exactly one of index (spectrum), elapsedMin (minutes) or last: true' }),
    )
    .optional(),
});

export interface BuildSettings {
  name: string;
  product: string;
  author: string;
  /** ms epoch, passed in (no clock in core). */
  createdAt: number;
  chain: ChainSpec;
  components: number | 'auto';
  confidence: number;
  /**
   * Method of the global Q limits (drawn and alarm): 'jackson-mudholkar' (default; Jackson &
   * Mudholkar 1979) or 'box' (Box 1954 g·χ²_h, as Nomikos & MacGregor 1995 use it). Where
   * Jackson–Mudholkar is undefined (h0 ≤ 0) the build uses Box and says so in the limit's note and
   * the model notes.
   */
  qMethod?: 'jackson-mudholkar' | 'box';
  progress: { kind: 'time' } | { kind: 'indicator'; source: 'pc1' | 'property' };
  /**
   * band 'sd' (default): mean ± k·sd. band 'prediction': k is replaced by the multiplier of a
   * prediction interval for one new batch, t(1 − α/(2A); I − 1)·√(1 + 1/I), α = 1 − confidence,
   * Bonferroni over the A PCs (simultaneous band; Nomikos & MacGregor 1995 for the per-point form).
   */
  envelope: { k: number; smoothing: number; points: number; band?: 'sd' | 'prediction' };
  endpoint: EndpointRuleSpec;
  /**
   * limits: which T²/Q limits raise alarms — the per-progress-point ones ('local', default) or the
   * global ones; startupMin: minutes after batch start with no alarm conditions (default 0);
   * confidence: the confidence of the limits that raise alarms (action limits), when it differs
   * from `confidence` (the limits drawn on the charts, warning limits). Two levels are the usual
   * practice of multivariate SPC (warning and action limits at 95 % and 99 % in Nomikos &
   * MacGregor 1995, Technometrics 37:41 — from memory). A 99 % limit is crossed by about one good
   * spectrum in a hundred; a batch of several hundred spectra judged on T², Q and every PC's
   * envelope meets that often enough that a good batch raises a confirmed alarm one time in ten
   * (measured: `npm run evaluate`), so alarms need the higher level.
   * pace: with an indicator-variable progress axis, also raise a condition when the batch is slower
   * than the golden batches to reach its next progress point (core/monitor/pace.ts) — a stalled
   * batch otherwise sits inside its envelope. Default off (models built before it keep their meaning).
   */
  alarms: { onDelay: number; onWindow: number; offDelay: number; deadband: number; limits?: 'global' | 'local'; startupMin?: number; confidence?: number; pace?: boolean };
  /**
   * chain: the property model's own preprocessing (default: the model's chain); range: calibrate on
   * lab values in [lo, hi] only; extrapolationConfidence: confidence of the flag "prediction outside
   * its calibration" (default: the model's confidence), calibrated over the whole batch range so
   * that it fires on about 1 − this of the spectra of good batches.
   * labSd: the lab (reference) method's standard deviation of one result near the target, in the
   * property's unit (e.g. the repeatability sd of loss on drying from the site's method validation;
   * with the sampling error when it is known). Given, the automatic endpoint margin takes it out of
   * RMSECV (core/model/endpoint-calibration.ts predictionErrorForMargin); absent, RMSECV is taken
   * whole, lab error and all (the margin errs late).
   */
  property?: { name: string; unit: string; components: number | 'auto'; target?: number; direction?: 'below' | 'above'; chain?: ChainSpec; range?: [number, number]; extrapolationConfidence?: number; labSd?: number };
  excludeSpectra?: { batch: string; index: number }[];
  /**
   * Endpoints of reference batches marked by the model owner (core/model/reference-endpoints.ts):
   * by spectrum index, by minutes from the batch's first spectrum (the first spectrum at or after
   * it), or `last: true` — the only way to make the last spectrum an endpoint. A mark decides for
   * its batch; batches without one take their endpoint from lab values crossing the target.
   */
  referenceEndpoints?: { batch: string; index?: number; elapsedMin?: number; last?: true; note?: string }[];
}

export type BuildSettingsInput = Pick<BuildSettings, 'name' | 'product' | 'author' | 'createdAt'> & Partial<Omit<BuildSettings, 'name' | 'product' | 'author' | 'createdAt'>>;

export const DEFAULT_SETTINGS: Omit<BuildSettings, 'name' | 'product' | 'author' | 'createdAt' | 'endpoint'> = {
  chain: [{ step: 'scale', center: true, scaling: 'none' }],
  components: 3,
  confidence: 0.99,
  progress: { kind: 'time' },
  envelope: { k: 3, smoothing: 2, points: 100 },
  alarms: { onDelay: 3, onWindow: 5, offDelay: 5, deadband: 0.05, limits: 'local', startupMin: 2 },
};

/** Fill defaults and validate; throws naming the first bad field. */
export function resolveBuildSettings(input: unknown): BuildSettings {
  if (typeof input !== 'object' || input === null) throw new TypeError('build settings must be an object');
  const unknown = unknownBuildSettingKeys(input);
  if (unknown.length) throw new RangeError(`build settings: ${unknown.map((k) => `"${k}"`).join(', ')} ${unknown.length === 1 ? 'is not a setting' : 'are not settings'} (a misspelt setting would build the model on the default)`);
  const i = input as Record<string, unknown>;
  const property = i.property as BuildSettings['property'] | undefined;
  const endpoint: EndpointRuleSpec =
    (i.endpoint as EndpointRuleSpec | undefined) ??
    (property?.target !== undefined
      ? { criteria: [{ kind: 'property' }], combine: 'all', confirm: 3, nearingMin: 10 }
      : { criteria: [{ kind: 'mbsd', block: 5, threshold: 'auto' }], combine: 'all', confirm: 3, nearingMin: 10 });
  const given = Object.fromEntries(Object.entries(i).filter(([, v]) => v !== undefined));
  const merged = { ...DEFAULT_SETTINGS, ...given, endpoint };
  // Nested groups: given fields over the defaults.
  if (typeof i.alarms === 'object' && i.alarms !== null) merged.alarms = { ...DEFAULT_SETTINGS.alarms, ...(i.alarms as object) };
  if (typeof i.envelope === 'object' && i.envelope !== null) merged.envelope = { ...DEFAULT_SETTINGS.envelope, ...(i.envelope as object) };
  const r = buildSettingsSchema.safeParse(merged);
  if (!r.success) {
    const issue = r.error.issues[0]!;
    throw new RangeError(`build settings: ${issue.path.join('.') || '(root)'}: ${issue.message}`);
  }
  const s = r.data as BuildSettings;
  if (s.alarms.confidence !== undefined && s.alarms.confidence < s.confidence) throw new RangeError(`build settings: alarms.confidence (${s.alarms.confidence}) must not be below confidence (${s.confidence}): alarm limits are at least as wide as the limits drawn`);
  if (s.alarms.onDelay > s.alarms.onWindow) throw new RangeError(`build settings: alarms.onDelay (${s.alarms.onDelay}) must not exceed alarms.onWindow (${s.alarms.onWindow})`);
  if (s.progress.kind === 'indicator' && s.progress.source === 'property' && !s.property) throw new RangeError('build settings: progress.source "property" needs a property model (settings.property)');
  // Asked for and silently not done would leave slow batches unflagged: refuse instead.
  if (s.alarms.pace === true && s.progress.kind !== 'indicator') throw new RangeError('build settings: alarms.pace needs progress on an indicator variable (progress: {"kind": "indicator", "source": "property"} or "pc1"): with progress as time every batch is where the golden batches were at that time, so its pace cannot be judged');
  for (const c of s.endpoint.criteria) {
    if (c.kind === 'property' && !s.property) throw new RangeError('build settings: endpoint criterion "property" needs a property model (settings.property)');
    if (c.kind === 'property' && c.target === undefined && s.property?.target === undefined) throw new RangeError('build settings: endpoint criterion "property" needs a target (criterion.target or property.target)');
    if (c.kind === 'plateau' && typeof s.components === 'number' && c.pc > s.components) throw new RangeError(`build settings: plateau criterion uses PC${c.pc} but the model has ${s.components} components`);
  }
  return s;
}

/** Settings as stored in a model file: validated as they are, without filling defaults (a stored model must not change meaning when defaults change). */
export function parseStoredSettings(input: unknown): BuildSettings {
  const r = buildSettingsSchema.safeParse(input);
  if (!r.success) {
    const issue = r.error.issues[0]!;
    throw new RangeError(`monitoring model: settings.${issue.path.join('.')}: ${issue.message}`);
  }
  return r.data as BuildSettings;
}

/**
 * Keys of a build-settings input that no setting has, as dotted paths (`alarms.confidance`), so a
 * misspelt setting is refused instead of building a model on the default. Checked over the plain
 * groups (top level, progress, envelope, alarms, property, excludeSpectra items); the chain and the
 * endpoint rule are checked by their own schemas, referenceEndpoints items are strict already.
 */
export function unknownBuildSettingKeys(input: unknown): string[] {
  if (typeof input !== 'object' || input === null || Array.isArray(input)) return [];
  const shape = buildSettingsSchema.shape;
  const known = (o: object) => new Set(Object.keys(o));
  const out: string[] = [];
  const check = (value: unknown, keys: Set<string>, prefix: string) => {
    if (typeof value !== 'object' || value === null || Array.isArray(value)) return;
    for (const k of Object.keys(value)) if (!keys.has(k)) out.push(prefix + k);
  };
  check(input, known(shape), '');
  const i = input as Record<string, unknown>;
  check(i.progress, new Set(['kind', 'source']), 'progress.');
  check(i.envelope, known(shape.envelope.shape), 'envelope.');
  check(i.alarms, known(shape.alarms.shape), 'alarms.');
  check(i.property, known(shape.property.unwrap().shape), 'property.');
  if (Array.isArray(i.excludeSpectra)) i.excludeSpectra.forEach((x, n) => check(x, known(shape.excludeSpectra.unwrap().element.shape), `excludeSpectra.${n}.`));
  return out;
}
