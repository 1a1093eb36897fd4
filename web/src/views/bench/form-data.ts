/**
 * Pure helpers for the Model bench builder form: the property model, its target and the endpoint
 * rule as typed, checked field by field into build settings (core/model/build-settings.ts), and the
 * server's refusal of a build placed beside the field it concerns. Every message is a sentence a
 * model owner can act on.
 */

export type Direction = 'below' | 'above';

/** One endpoint criterion as typed (numbers as text; 'auto' where the build may calibrate it). */
export type CriterionForm =
  | { kind: 'property'; margin: 'auto' | 'none' | string; marginConfidence: string }
  | { kind: 'mbsd'; block: string; threshold: 'auto' | string }
  | { kind: 'plateau'; pc: string; window: string; tolerance: 'auto' | string }
  | { kind: 'golden-end' };

export interface RuleForm {
  criteria: CriterionForm[];
  combine: 'all' | 'any';
  confirm: string;
  nearingMin: string;
  /** No 'done' before this many minutes: 'none', 'auto' (from the known endpoints) or minutes as text. */
  minElapsed: 'none' | 'auto' | string;
}

export interface PropertyForm {
  /** Off: no property model (the rule then cannot use the predicted property). */
  on: boolean;
  name: string;
  unit: string;
  /** 'auto': the build chooses the LV count by its stated rule; else a number as text. */
  lvs: 'auto' | string;
  target: string;
  direction: Direction;
  /** The lab method's sd of one result near the target, as text ('' or absent: not stated). */
  labSd?: string;
}

export interface LimitsForm {
  qMethod: 'jackson-mudholkar' | 'box';
}

/** Field keys errors are shown beside ('' = the form as a whole). */
export type FieldKey = string;

export const NEW_CRITERION: Record<CriterionForm['kind'], () => CriterionForm> = {
  property: () => ({ kind: 'property', margin: 'auto', marginConfidence: '' }),
  mbsd: () => ({ kind: 'mbsd', block: '5', threshold: 'auto' }),
  plateau: () => ({ kind: 'plateau', pc: '1', window: '10', tolerance: 'auto' }),
  'golden-end': () => ({ kind: 'golden-end' }),
};

export const CRITERION_LABEL: Record<CriterionForm['kind'], string> = {
  property: 'predicted property past its target',
  mbsd: 'moving-block SD of the spectra below a threshold',
  plateau: 'a PC score levels off (slope within a tolerance)',
  'golden-end': 'scores within the golden end region',
};

/** A number typed in a field: finite, else null. Accepts a decimal comma. */
export function parseNumber(text: string): number | null {
  const t = text.trim().replace(',', '.');
  if (t === '' || !/^[-+]?(\d+\.?\d*|\.\d+)(e[-+]?\d+)?$/i.test(t)) return null;
  const v = Number(t);
  return Number.isFinite(v) ? v : null;
}

function int(text: string): number | null {
  const v = parseNumber(text);
  return v !== null && Number.isInteger(v) ? v : null;
}

/**
 * The property model, target and endpoint rule of the form as build settings, or the sentences
 * that say what to fix, each under the key of its field ('property.target', 'endpoint.criteria.1.threshold', …).
 */
export function settingsFromForm(p: PropertyForm, rule: RuleForm, limits: LimitsForm, components: number | 'auto'): { settings: Record<string, unknown>; errors: Record<FieldKey, string> } {
  const errors: Record<FieldKey, string> = {};
  const settings: Record<string, unknown> = { qMethod: limits.qMethod };
  const usesProperty = rule.criteria.some((c) => c.kind === 'property');
  let target: number | null = null;
  if (p.on) {
    if (!p.name.trim()) errors['property.name'] = 'Choose the property the model predicts (a lab value the reference batches carry).';
    if (!p.unit.trim()) errors['property.unit'] = `Give the unit of ${p.name.trim() || 'the property'} as the lab reports it, e.g. % w/w.`;
    let lvs: number | 'auto' = 'auto';
    if (p.lvs !== 'auto') {
      const n = int(p.lvs);
      if (n === null || n < 1 || n > 30) errors['property.lvs'] = 'Latent variables: a whole number from 1 to 30, or auto.';
      else lvs = n;
    }
    if (p.target.trim() !== '') {
      target = parseNumber(p.target);
      if (target === null) errors['property.target'] = `The target "${p.target}" is not a number.`;
    } else if (usesProperty) errors['property.target'] = `The endpoint rule watches the predicted ${p.name.trim() || 'property'}: give its target, e.g. 2.`;
    let labSd: number | null = null;
    if ((p.labSd ?? '').trim() !== '') {
      labSd = parseNumber(p.labSd!);
      if (labSd === null || labSd < 0) errors['property.labSd'] = `The lab sd "${p.labSd}" must be a number ≥ 0 in ${p.unit.trim() || "the property's unit"}, or left empty.`;
    }
    settings.property = {
      name: p.name.trim().toLowerCase(),
      unit: p.unit.trim(),
      components: lvs,
      ...(target !== null ? { target, direction: p.direction } : {}),
      ...(labSd !== null && labSd >= 0 ? { labSd } : {}),
    };
  } else if (usesProperty) {
    errors['endpoint.criteria'] = 'The criterion "predicted property past its target" needs a property model: turn it on above, or remove the criterion.';
  }

  if (rule.criteria.length === 0) errors['endpoint.criteria'] = 'Give at least one criterion for the endpoint.';
  const criteria = rule.criteria.map((c, i): Record<string, unknown> => {
    const at = (f: string) => `endpoint.criteria.${i}.${f}`;
    switch (c.kind) {
      case 'property': {
        const out: Record<string, unknown> = { kind: 'property' };
        if (c.margin === 'auto') {
          out.margin = 'auto';
          if (c.marginConfidence.trim() !== '') {
            const v = parseNumber(c.marginConfidence);
            const f = v === null ? null : v > 1 ? v / 100 : v;
            if (f === null || !(f > 0.5 && f < 1)) errors[at('marginConfidence')] = 'Margin confidence: a value between 50 and 100 %, e.g. 70 %.';
            else out.marginConfidence = f;
          }
        } else if (c.margin !== 'none') {
          const v = parseNumber(c.margin);
          if (v === null || v < 0) errors[at('margin')] = `The margin "${c.margin}" must be a number ≥ 0 in the property's unit, or auto.`;
          else out.margin = v;
        }
        return out;
      }
      case 'mbsd': {
        const block = int(c.block);
        if (block === null || block < 2 || block > 50) errors[at('block')] = 'Block: a whole number of spectra from 2 to 50.';
        let threshold: number | 'auto' = 'auto';
        if (c.threshold !== 'auto') {
          const v = parseNumber(c.threshold);
          if (v === null || v <= 0) errors[at('threshold')] = `The threshold "${c.threshold}" must be a number above 0, or auto.`;
          else threshold = v;
        }
        return { kind: 'mbsd', block: block ?? 5, threshold };
      }
      case 'plateau': {
        const pc = int(c.pc);
        if (pc === null || pc < 1) errors[at('pc')] = 'PC: a whole number from 1.';
        else if (typeof components === 'number' && pc > components) errors[at('pc')] = `The model has ${components} components: choose a PC from 1 to ${components}.`;
        const window = int(c.window);
        if (window === null || window < 3 || window > 200) errors[at('window')] = 'Window: a whole number of spectra from 3 to 200.';
        let tolerance: number | 'auto' = 'auto';
        if (c.tolerance !== 'auto') {
          const v = parseNumber(c.tolerance);
          if (v === null || v <= 0) errors[at('tolerance')] = `The tolerance "${c.tolerance}" must be a number above 0 (score per minute), or auto.`;
          else tolerance = v;
        }
        return { kind: 'plateau', pc: pc ?? 1, window: window ?? 10, tolerance };
      }
      case 'golden-end':
        return { kind: 'golden-end' };
    }
  });
  const kinds = rule.criteria.map((c) => c.kind);
  kinds.forEach((k, i) => {
    if (kinds.indexOf(k) !== i) errors[`endpoint.criteria.${i}.kind`] = `"${CRITERION_LABEL[k]}" is already a criterion.`;
  });
  const confirm = int(rule.confirm);
  if (confirm === null || confirm < 1 || confirm > 100) errors['endpoint.confirm'] = 'Confirm over: a whole number of consecutive spectra from 1 to 100.';
  const nearing = parseNumber(rule.nearingMin);
  if (nearing === null || nearing < 0) errors['endpoint.nearingMin'] = '"Nearing" from: minutes before the estimated endpoint, a number ≥ 0.';
  let minElapsedMin: number | 'auto' | undefined;
  if (rule.minElapsed === 'auto') minElapsedMin = 'auto';
  else if (rule.minElapsed !== 'none') {
    const v = parseNumber(rule.minElapsed);
    if (v === null || v < 0) errors['endpoint.minElapsedMin'] = `The minimum time "${rule.minElapsed}" must be minutes ≥ 0, or auto.`;
    else minElapsedMin = v;
  }
  settings.endpoint = { criteria, combine: rule.combine, confirm: confirm ?? 2, nearingMin: nearing ?? 10, ...(minElapsedMin !== undefined ? { minElapsedMin } : {}) };
  return { settings, errors };
}

/**
 * Where a refused build's message belongs: the field it names, the property model, one criterion
 * of the rule, the reference batches' endpoints, or the form as a whole (''). The server answers
 * "the model could not be built: …" with core's sentence.
 */
/** The API's ways to give an endpoint, said as the form offers them (the server's sentence names settings and routes). */
function formWords(text: string): string {
  return text
    .replace(/\(settings\.property with a target, and lab values on the batches\)/, '(turn on the property model above with a target; the batches need lab values)')
    .replace(/\(a property column in the imported file, or POST \/api\/batches\/:batch\/lab-values\)/, '(imported with the batches, or attached in Review)')
    .replace(/marks in settings\.referenceEndpoints \(.*?\) — or leave/, 'an endpoint typed in the table for each (minutes from the start, a spectrum as #316, or last only if the batch really ended there) — or leave');
}

export function fieldOfBuildError(message: string, rule: RuleForm): { field: FieldKey; text: string } {
  const text = message.replace(/^.*?the model could not be built:\s*/i, '').trim();
  const cap = text.charAt(0).toUpperCase() + text.slice(1);
  const path = /^build settings: ([\w.]+): /.exec(text);
  if (path) {
    const p = path[1]!;
    const field = p.startsWith('endpoint.criteria.') ? p.split('.').slice(0, 3).join('.') : p.startsWith('property.') ? p : p.split('.')[0]!;
    return { field, text: cap };
  }
  const criterion = (kind: CriterionForm['kind']) => {
    const i = rule.criteria.findIndex((c) => c.kind === kind);
    return i >= 0 ? `endpoint.criteria.${i}` : 'endpoint.criteria';
  };
  if (/^(build settings: )?endpoint criterion "property"/.test(text)) return { field: criterion('property'), text: cap };
  if (/^moving-block SD criterion/i.test(text)) return { field: criterion('mbsd'), text: cap };
  if (/^plateau criterion/i.test(text)) return { field: criterion('plateau'), text: cap };
  if (/^golden end region/i.test(text)) return { field: criterion('golden-end'), text: cap };
  if (/^minimum time/i.test(text)) return { field: 'endpoint.minElapsedMin', text: cap };
  if (/^(build settings: )?property model|progress\.source "property"/.test(text)) return { field: 'property', text: cap };
  if (/referenceEndpoints|known endpoint|endpoints? (of|for) /i.test(text)) return { field: 'referenceEndpoints', text: formWords(cap) };
  if (/^reference batch|^excludeSpectra/.test(text)) return { field: 'referenceBatches', text: cap };
  return { field: '', text: cap };
}
