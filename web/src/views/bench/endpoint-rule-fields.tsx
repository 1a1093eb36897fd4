/**
 * Builder: the endpoint rule — criteria (each with its threshold or 'auto'), how they combine, how
 * many spectra confirm, the minimum time before 'done', with the endpoint caution beside it.
 */
import { Advisory } from '../../components/status.tsx';
import { CRITERION_LABEL, NEW_CRITERION, type CriterionForm, type FieldKey, type RuleForm } from './form-data.ts';
import { FieldError } from './field-error.tsx';

const KINDS = Object.keys(CRITERION_LABEL) as CriterionForm['kind'][];

function AutoOrNumber({ label, value, onChange, unit, auto = 'auto' }: { label: string; value: string; onChange: (v: string) => void; unit?: string; auto?: string }) {
  const isAuto = value === 'auto';
  return (
    <label>
      {label}{' '}
      <select aria-label={`${label}: automatic or a number`} value={isAuto ? 'auto' : 'n'} onChange={(e) => onChange((e.target as HTMLSelectElement).value === 'auto' ? 'auto' : '')}>
        <option value="auto">{auto}</option>
        <option value="n">a number</option>
      </select>
      {!isAuto && <input size={7} aria-label={label} value={value} onInput={(e) => onChange((e.target as HTMLInputElement).value)} />} {!isAuto && unit}
    </label>
  );
}

function CriterionFields({ c, i, unit, onChange, errors }: { c: CriterionForm; i: number; unit: string; onChange: (c: CriterionForm) => void; errors: Record<FieldKey, string> }) {
  const e = (f: string) => errors[`endpoint.criteria.${i}.${f}`];
  switch (c.kind) {
    case 'property':
      return (
        <>
          <div class="form-row">
            <label>
              Margin{' '}
              <select
                aria-label="margin: automatic, none or a number"
                value={c.margin === 'auto' || c.margin === 'none' ? c.margin : 'n'}
                onChange={(ev) => {
                  const v = (ev.target as HTMLSelectElement).value;
                  onChange({ ...c, margin: v === 'n' ? '' : (v as 'auto' | 'none') });
                }}
              >
                <option value="auto">auto: z(confidence) × RMSECV</option>
                <option value="none">none</option>
                <option value="n">a number</option>
              </select>
              {c.margin !== 'auto' && c.margin !== 'none' && <input size={7} aria-label="margin" value={c.margin} onInput={(ev) => onChange({ ...c, margin: (ev.target as HTMLInputElement).value })} />}
            </label>
            {c.margin === 'auto' && (
              <label>
                Margin confidence <input size={4} aria-label="margin confidence" placeholder="model's" value={c.marginConfidence} onInput={(ev) => onChange({ ...c, marginConfidence: (ev.target as HTMLInputElement).value })} /> %
              </label>
            )}
          </div>
          <p class="muted small">The prediction must clear the target by the margin ({unit || 'property units'}), so an error of the prediction does not call the batch done early.</p>
          <FieldError text={e('margin')} />
          <FieldError text={e('marginConfidence')} />
        </>
      );
    case 'mbsd':
      return (
        <>
          <div class="form-row">
            <label>
              Block <input size={3} aria-label="block of spectra" value={c.block} onInput={(ev) => onChange({ ...c, block: (ev.target as HTMLInputElement).value })} /> spectra
            </label>
            <AutoOrNumber label="Threshold" value={c.threshold} onChange={(v) => onChange({ ...c, threshold: v })} auto="auto: from the known endpoints" />
          </div>
          <FieldError text={e('block')} />
          <FieldError text={e('threshold')} />
        </>
      );
    case 'plateau':
      return (
        <>
          <div class="form-row">
            <label>
              PC <input size={2} aria-label="plateau PC" value={c.pc} onInput={(ev) => onChange({ ...c, pc: (ev.target as HTMLInputElement).value })} />
            </label>
            <label>
              Window <input size={3} aria-label="plateau window" value={c.window} onInput={(ev) => onChange({ ...c, window: (ev.target as HTMLInputElement).value })} /> spectra
            </label>
            <AutoOrNumber label="Tolerance" value={c.tolerance} onChange={(v) => onChange({ ...c, tolerance: v })} unit="per min" auto="auto: from the known endpoints" />
          </div>
          <FieldError text={e('pc')} />
          <FieldError text={e('window')} />
          <FieldError text={e('tolerance')} />
        </>
      );
    case 'golden-end':
      return <p class="muted small">The scores within the golden end region: the reference batches' scores at their known endpoints, with a Hotelling limit.</p>;
  }
}

export function EndpointRuleFields({ value, onChange, unit, errors }: { value: RuleForm; onChange: (r: RuleForm) => void; unit: string; errors: Record<FieldKey, string> }) {
  const set = (r: Partial<RuleForm>) => onChange({ ...value, ...r });
  const setCrit = (i: number, c: CriterionForm) => set({ criteria: value.criteria.map((x, k) => (k === i ? c : x)) });
  const missing = KINDS.filter((k) => !value.criteria.some((c) => c.kind === k));
  return (
    <fieldset data-testid="endpoint-rule-fields" class="endpoint-rule-fields">
      <legend>Endpoint rule</legend>
      <div class="rule-grid">
        <div>
          <FieldError text={errors['endpoint.criteria']} />
          <ol class="criteria-list">
            {value.criteria.map((c, i) => (
              <li key={`${c.kind}-${i}`} data-testid={`criterion-${c.kind}`}>
                <div class="panel-head">
                  <b>{CRITERION_LABEL[c.kind]}</b>
                  <button type="button" class="btn small" onClick={() => set({ criteria: value.criteria.filter((_, k) => k !== i) })}>
                    Remove
                  </button>
                </div>
                <CriterionFields c={c} i={i} unit={unit} onChange={(x) => setCrit(i, x)} errors={errors} />
                <FieldError text={errors[`endpoint.criteria.${i}`]} />
                <FieldError text={errors[`endpoint.criteria.${i}.kind`]} />
              </li>
            ))}
          </ol>
          {missing.length > 0 && (
            <label>
              Add a criterion{' '}
              <select
                aria-label="add a criterion"
                value=""
                onChange={(e) => {
                  const k = (e.target as HTMLSelectElement).value as CriterionForm['kind'];
                  if (k) set({ criteria: [...value.criteria, NEW_CRITERION[k]()] });
                }}
              >
                <option value="">choose…</option>
                {missing.map((k) => (
                  <option key={k} value={k}>
                    {CRITERION_LABEL[k]}
                  </option>
                ))}
              </select>
            </label>
          )}
          <div class="form-row">
            <label>
              Combine{' '}
              <select value={value.combine} onChange={(e) => set({ combine: (e.target as HTMLSelectElement).value as RuleForm['combine'] })}>
                <option value="all">all criteria must hold</option>
                <option value="any">any one suffices</option>
              </select>
            </label>
            <label>
              Confirm over <input size={3} aria-label="confirm over spectra" value={value.confirm} onInput={(e) => set({ confirm: (e.target as HTMLInputElement).value })} /> consecutive spectra
            </label>
            <label>
              "Nearing" from <input size={4} aria-label="nearing minutes" value={value.nearingMin} onInput={(e) => set({ nearingMin: (e.target as HTMLInputElement).value })} /> min before
            </label>
          </div>
          <FieldError text={errors['endpoint.confirm']} />
          <FieldError text={errors['endpoint.nearingMin']} />
          <div class="form-row">
            <label>
              No "done" before{' '}
              <select
                aria-label="minimum time: none, automatic or minutes"
                value={value.minElapsed === 'none' || value.minElapsed === 'auto' ? value.minElapsed : 'n'}
                onChange={(e) => {
                  const v = (e.target as HTMLSelectElement).value;
                  set({ minElapsed: v === 'n' ? '' : v });
                }}
              >
                <option value="auto">auto: a lower bound on the known endpoint times</option>
                <option value="none">no minimum</option>
                <option value="n">a time</option>
              </select>
              {value.minElapsed !== 'none' && value.minElapsed !== 'auto' && (
                <>
                  {' '}
                  <input size={5} aria-label="minimum minutes" value={value.minElapsed} onInput={(e) => set({ minElapsed: (e.target as HTMLInputElement).value })} /> min from the start
                </>
              )}
            </label>
          </div>
          <FieldError text={errors['endpoint.minElapsedMin']} />
        </div>
        <aside class="rule-caution">
          <Advisory text="An endpoint signal may stop a dryer or end a reaction. Tideline advises: the site's validated control strategy, interlocks and procedures decide what the signal may do. Check the rule on the reference batches (the version page replays it leave-one-batch-out) before it is approved." />
          <p class="muted small">
            "auto" thresholds are calibrated at the reference batches' known endpoints — from lab values crossing the target, or your marks above — never at the last spectrum unless you say so.
          </p>
        </aside>
      </div>
    </fieldset>
  );
}
