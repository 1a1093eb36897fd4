/**
 * The preprocessing chain as data: an ordered list of steps, each a small JSON object.
 * `validateChainSpec` checks what can be checked without an axis (types, odd windows, orders,
 * ranges); `fitChain` checks the rest against the axis (window longer than the spectrum, a range
 * with no points, resampling outside the measured axis). Every refusal is a PreprocessSpecError
 * naming the step index, the step and the parameter.
 */
import { z } from 'zod';

const finite = z.number().refine(Number.isFinite, { message: 'must be a finite number' });
const range = z.tuple([finite, finite]);
const ranges = z.array(range);

export const selectStepSchema = z.strictObject({ step: z.literal('select'), ranges });
export const excludeStepSchema = z.strictObject({ step: z.literal('exclude'), ranges });
/**
 * Resample by linear interpolation: onto the wavelengths given (`axis`), or onto an even grid
 * (`even: true`) from the first to the last wavelength entering the step with the same number of
 * points (or `points`) — for axes written rounded (e.g. to 0.01 nm) or uneven like a diode array's,
 * before a Savitzky–Golay step.
 */
export const resampleStepSchema = z.strictObject({
  step: z.literal('resample'),
  axis: z.array(finite).optional(),
  even: z.literal(true).optional(),
  points: z.number().int().min(2).max(100_000).optional(),
});
export const snvStepSchema = z.strictObject({ step: z.literal('snv') });
export const mscStepSchema = z.strictObject({ step: z.literal('msc') });
export const detrendStepSchema = z.strictObject({ step: z.literal('detrend'), order: z.number().int().min(0).max(10) });
export const savgolStepSchema = z.strictObject({
  step: z.literal('savgol'),
  window: z.number().int().min(1).max(1001),
  polyorder: z.number().int().min(0),
  deriv: z.union([z.literal(0), z.literal(1), z.literal(2)], { error: 'must be 0 (smoothing), 1 or 2 (derivative order)' }),
});
export const scaleStepSchema = z.strictObject({
  step: z.literal('scale'),
  center: z.boolean(),
  scaling: z.enum(['none', 'uv', 'pareto']),
});

const schemaByStep = {
  select: selectStepSchema,
  exclude: excludeStepSchema,
  resample: resampleStepSchema,
  snv: snvStepSchema,
  msc: mscStepSchema,
  detrend: detrendStepSchema,
  savgol: savgolStepSchema,
  scale: scaleStepSchema,
} as const;

export const STEP_NAMES = Object.keys(schemaByStep) as (keyof typeof schemaByStep)[];

export const stepSpecSchema = z.discriminatedUnion('step', [
  selectStepSchema,
  excludeStepSchema,
  resampleStepSchema,
  snvStepSchema,
  mscStepSchema,
  detrendStepSchema,
  savgolStepSchema,
  scaleStepSchema,
]);
export type StepSpec = z.infer<typeof stepSpecSchema>;
export type ChainSpec = StepSpec[];
/** The structural schema; use validateChainSpec for the full check with readable messages. */
export const chainSpecSchema = z.array(stepSpecSchema);

/** A refused chain: names the step (0-based index into the chain), the step name and the parameter. */
export class PreprocessSpecError extends Error {
  constructor(
    readonly stepIndex: number,
    readonly step: string,
    readonly parameter: string | null,
    detail: string,
  ) {
    super(
      stepIndex < 0
        ? `preprocessing chain: ${detail}`
        : `preprocessing steps[${stepIndex}] (${step})${parameter ? `, parameter '${parameter}'` : ''}: ${detail}`,
    );
    this.name = 'PreprocessSpecError';
  }
}

function checkRanges(i: number, step: string, rs: [number, number][]): void {
  if (rs.length === 0) throw new PreprocessSpecError(i, step, 'ranges', 'needs at least one [from, to] range in nm');
  rs.forEach(([a, b], k) => {
    if (!(a < b)) throw new PreprocessSpecError(i, step, 'ranges', `range ${k} [${a}, ${b}] is empty: 'from' must be below 'to' (nm)`);
  });
  const sorted = rs.map((r, k) => ({ r, k })).sort((u, v) => u.r[0] - v.r[0]);
  for (let k = 1; k < sorted.length; k++) {
    const prev = sorted[k - 1]!;
    const cur = sorted[k]!;
    if (cur.r[0] <= prev.r[1]) {
      throw new PreprocessSpecError(i, step, 'ranges', `range ${cur.k} [${cur.r[0]}, ${cur.r[1]}] overlaps range ${prev.k} [${prev.r[0]}, ${prev.r[1]}]`);
    }
  }
}

/** Check one step (index i) and return it typed. */
export function validateStepSpec(value: unknown, i: number): StepSpec {
  if (typeof value !== 'object' || value === null || Array.isArray(value)) {
    throw new PreprocessSpecError(i, '?', null, 'a step must be an object such as {"step":"snv"}');
  }
  const name = (value as { step?: unknown }).step;
  if (typeof name !== 'string' || !(name in schemaByStep)) {
    throw new PreprocessSpecError(i, name === undefined ? 'missing' : String(name), 'step', `unknown step; known steps: ${STEP_NAMES.join(', ')}`);
  }
  const schema = schemaByStep[name as keyof typeof schemaByStep];
  const r = schema.safeParse(value);
  if (!r.success) {
    const issue = r.error.issues[0]!;
    const param = issue.code === 'unrecognized_keys' ? issue.keys.join(', ') : issue.path.length ? String(issue.path[0]) : null;
    const detail = issue.code === 'unrecognized_keys' ? `not a parameter of ${name}` : `${issue.message}${issue.path.length > 1 ? ` (at ${issue.path.join('.')})` : ''}`;
    throw new PreprocessSpecError(i, name, param, detail);
  }
  const s = r.data as StepSpec;
  switch (s.step) {
    case 'select':
    case 'exclude':
      checkRanges(i, s.step, s.ranges);
      break;
    case 'resample': {
      if ((s.axis === undefined) === (s.even === undefined)) throw new PreprocessSpecError(i, s.step, 'axis', 'give the target wavelengths (axis) or even: true (an even grid over the axis entering the step), one of them');
      if (s.points !== undefined && !s.even) throw new PreprocessSpecError(i, s.step, 'points', 'points goes with even: true');
      if (!s.axis) break;
      if (s.axis.length < 2) throw new PreprocessSpecError(i, s.step, 'axis', 'needs at least 2 wavelengths');
      for (let k = 1; k < s.axis.length; k++) {
        if (!(s.axis[k]! > s.axis[k - 1]!)) throw new PreprocessSpecError(i, s.step, 'axis', `must increase strictly; value ${k} (${s.axis[k]}) is not above value ${k - 1} (${s.axis[k - 1]})`);
      }
      break;
    }
    case 'savgol':
      if (s.window % 2 !== 1) throw new PreprocessSpecError(i, s.step, 'window', `must be odd; got ${s.window}`);
      if (s.polyorder >= s.window) throw new PreprocessSpecError(i, s.step, 'polyorder', `must be below window (${s.window}); got ${s.polyorder}`);
      if (s.deriv > s.polyorder) throw new PreprocessSpecError(i, s.step, 'deriv', `derivative ${s.deriv} needs polyorder ≥ ${s.deriv}; got polyorder ${s.polyorder}`);
      break;
    default:
      break;
  }
  return s;
}

/** Validate a whole chain; throws PreprocessSpecError naming step index, step and parameter. */
export function validateChainSpec(spec: unknown): ChainSpec {
  if (!Array.isArray(spec)) throw new PreprocessSpecError(-1, 'chain', null, 'the chain must be an array of steps');
  return spec.map((s, i) => validateStepSpec(s, i));
}
