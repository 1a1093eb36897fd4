/**
 * Model bench builder: reference batches and their endpoints, the preprocessing chain, the
 * components and limits, the property model with its target, and the endpoint rule. Every problem —
 * found here or by the build on the server — is a sentence under the field it concerns.
 */
import { useMemo, useState } from 'preact/hooks';
import type { ChainSpec } from '../../../../core/preprocess/index.ts';
import { validateChainSpec } from '../../../../core/preprocess/index.ts';
import { api } from '../../api/endpoints.ts';
import { errorText } from '../../api/problem.ts';
import type { Me } from '../../api/session.ts';
import { useAsync } from '../../components/use-async.ts';
import { ErrorBox, Loading } from '../../components/status.tsx';
import { confidence } from '../../format/number-format.ts';
import { href } from '../../router.ts';
import { CHAIN_PRESETS, buildSettingsFromForm, parseEndpointMark, type EndpointMark } from '../bench-data.ts';
import { ChainPreview } from './chain-preview.tsx';
import { EndpointRuleFields } from './endpoint-rule-fields.tsx';
import { FieldError } from './field-error.tsx';
import { NEW_CRITERION, fieldOfBuildError, settingsFromForm, type FieldKey, type PropertyForm, type RuleForm } from './form-data.ts';
import { labOfBatches } from './lab-data.ts';
import { PropertyFields } from './property-fields.tsx';
import { ReferenceBatches } from './reference-batches.tsx';
import { HistoryPanel } from './history-panel.tsx';

/** Model names are ids: letters, digits and . _ : - only. */
export function modelName(s: string): string {
  return s.trim().replace(/[^A-Za-z0-9._:-]+/g, '-').slice(0, 128);
}

type Progress = 'time' | 'property' | 'pc1';
const PROGRESS_SETTINGS: Record<Progress, Record<string, string>> = { time: { kind: 'time' }, property: { kind: 'indicator', source: 'property' }, pc1: { kind: 'indicator', source: 'pc1' } };
/** Where a refusal naming one of these settings is shown: beside the components and limits. */
const LIMIT_FIELDS = ['components', 'confidence', 'alarms', 'qMethod', 'progress', 'envelope', 'chain'];

export function Builder({ me }: { me: Me | null }) {
  const batches = useAsync(() => api.batches({ status: 'ended', limit: 500 }), []);
  const [product, setProduct] = useState<string>('');
  const [chosen, setChosen] = useState<string[]>([]);
  const [name, setName] = useState('');
  const [preset, setPreset] = useState(CHAIN_PRESETS[0].id);
  const [custom, setCustom] = useState(JSON.stringify(CHAIN_PRESETS[0].chain, null, 1));
  const [components, setComponents] = useState<number | 'auto'>('auto');
  const [conf, setConf] = useState(0.99);
  // alarms at 99.9 % by default: at the 99 % limits about one good batch in ten raised an alarm in
  // the evaluation (README, Measured)
  const [alarmConf, setAlarmConf] = useState(0.999);
  const [qMethod, setQMethod] = useState<'jackson-mudholkar' | 'box'>('jackson-mudholkar');
  const [progress, setProgress] = useState<Progress>('time');
  // pace against the golden batches: judged only with progress on an indicator variable (a stalled
  // or slowly drying batch sits inside its envelope otherwise)
  const [pace, setPace] = useState(true);
  const [ends, setEnds] = useState<Record<string, string>>({});
  const [prop, setProp] = useState<PropertyForm>({ on: false, name: '', unit: '', lvs: 'auto', target: '', direction: 'below' });
  const [rule, setRule] = useState<RuleForm>({ criteria: [NEW_CRITERION.mbsd()], combine: 'all', confirm: '2', nearingMin: '10', minElapsed: 'auto' });
  const [errors, setErrors] = useState<Record<FieldKey, string>>({});
  const [error, setError] = useState<string | null>(null);
  const [busy, setBusy] = useState(false);
  const [preview, setPreview] = useState<string | null>(null);

  const products = useMemo(() => [...new Set((batches.data?.items ?? []).map((b) => b.product))].sort(), [batches.data]);
  const shown = (batches.data?.items ?? []).filter((b) => !product || b.product === product);
  const lab = useAsync(() => (chosen.length ? labOfBatches(chosen) : Promise.resolve([])), [chosen.join(',')]);
  const known = lab.data ?? [];
  const knownNote =
    lab.data === null
      ? 'This server does not list lab values: type the property as it was imported.'
      : chosen.length === 0
        ? 'Choose reference batches to see the lab values they carry.'
        : known.length === 0
          ? `The ${chosen.length} chosen batches carry no lab values: a property model needs them (import a property column, or attach lab results in Review).`
          : `Lab values on the chosen batches: ${known.map((k) => `${k.property} (${k.values} on ${k.batches} of ${chosen.length} batches)`).join('; ')}.`;
  const chainResult = useMemo((): { chain: ChainSpec } | { error: string } => {
    try {
      const raw = preset === 'custom' ? JSON.parse(custom) : CHAIN_PRESETS.find((p) => p.id === preset)!.chain;
      return { chain: validateChainSpec(raw) };
    } catch (e) {
      return { error: e instanceof SyntaxError ? `The chain is not valid JSON: ${e.message}` : errorText(e) };
    }
  }, [preset, custom]);

  // Turning the property model on puts its target into the rule; off takes it out again.
  const setPropForm = (p: PropertyForm) => {
    if (p.on !== prop.on) {
      const has = rule.criteria.some((c) => c.kind === 'property');
      if (p.on && !has) setRule({ ...rule, criteria: [NEW_CRITERION.property(), ...rule.criteria] });
      if (!p.on && has) setRule({ ...rule, criteria: rule.criteria.filter((c) => c.kind !== 'property') });
      if (!p.on && progress === 'property') setProgress('time');
    }
    setProp(p);
  };

  const build = async () => {
    setError(null);
    const errs: Record<FieldKey, string> = {};
    if (!('chain' in chainResult)) errs.chain = chainResult.error;
    if (chosen.length < 2) errs.referenceBatches = 'Choose at least two reference batches.';
    const marks: EndpointMark[] = [];
    const markErrors: Record<string, string> = {};
    for (const b of chosen) {
      try {
        const m = parseEndpointMark(b, ends[b] ?? '');
        if (m) marks.push(m);
      } catch (e) {
        markErrors[b] = errorText(e);
      }
    }
    for (const [b, t] of Object.entries(markErrors)) errs[`mark.${b}`] = t;
    const form = settingsFromForm(prop, rule, { qMethod }, components);
    Object.assign(errs, form.errors);
    if (progress === 'property' && !prop.on) errs.progress = 'Progress on the predicted property needs a property model: turn it on, or choose time.';
    setErrors(errs);
    if (Object.keys(errs).length || !('chain' in chainResult)) return;
    const prod = product || shown.find((b) => chosen.includes(b.id))?.product || '';
    setBusy(true);
    try {
      const base = buildSettingsFromForm({ chain: chainResult.chain, components, confidence: conf, alarmConfidence: Math.max(alarmConf, conf), referenceEndpoints: marks });
      const judgePace = pace && progress !== 'time';
      const v = await api.build({
        name: modelName(name || `${prod}-model`),
        product: prod,
        referenceBatches: chosen,
        settings: {
          ...base,
          ...(judgePace ? { alarms: { ...((base.alarms as Record<string, unknown> | undefined) ?? {}), pace: true } } : {}),
          ...form.settings,
          progress: PROGRESS_SETTINGS[progress],
        },
      });
      location.hash = href({ view: 'bench', version: v.versionId });
    } catch (e) {
      const f = fieldOfBuildError(errorText(e), rule);
      if (f.field === '') setError(f.text);
      else setErrors({ [LIMIT_FIELDS.includes(f.field) ? 'limits' : f.field]: f.text });
    } finally {
      setBusy(false);
    }
  };
  const marksErr = Object.fromEntries(Object.entries(errors).filter(([k]) => k.startsWith('mark.')).map(([k, v]) => [k.slice(5), v]));
  const limitErrs = LIMIT_FIELDS.map((k) => errors[k]).filter(Boolean) as string[];

  return (
    <div class="panel builder" data-testid="builder">
      <h2>New model from reference batches</h2>
      {batches.loading && !batches.data && <Loading what="finished batches" />}
      {batches.error && <ErrorBox message={batches.error} onRetry={batches.reload} />}
      <div class="form-row">
        <label>
          Product{' '}
          <select value={product} onChange={(e) => setProduct((e.target as HTMLSelectElement).value)}>
            <option value="">all products</option>
            {products.map((p) => (
              <option key={p}>{p}</option>
            ))}
          </select>
        </label>
        <label>
          Model name <input value={name} placeholder="e.g. dryer-granule-A" onInput={(e) => setName((e.target as HTMLInputElement).value)} />
        </label>
      </div>
      {batches.data && shown.length === 0 && <p class="muted">No finished batches{product ? ` of ${product}` : ''}.</p>}
      <ReferenceBatches
        shown={shown}
        chosen={chosen}
        onChosen={setChosen}
        ends={ends}
        onEnds={setEnds}
        onPreview={setPreview}
        errors={{ referenceBatches: errors.referenceBatches, referenceEndpoints: errors.referenceEndpoints, marks: marksErr }}
      />
      <fieldset>
        <legend>Preprocessing chain</legend>
        {CHAIN_PRESETS.map((p) => (
          <label key={p.id} class="radio block">
            <input type="radio" name="preset" checked={preset === p.id} onChange={() => (setPreset(p.id), setCustom(JSON.stringify(p.chain, null, 1)))} /> {p.label}
            <span class="muted small"> — {p.note}</span>
          </label>
        ))}
        <label class="radio block">
          <input type="radio" name="preset" checked={preset === 'custom'} onChange={() => setPreset('custom')} /> Custom (JSON list of steps)
        </label>
        {preset === 'custom' && <textarea rows={5} class="mono" value={custom} onInput={(e) => setCustom((e.target as HTMLTextAreaElement).value)} />}
        {'error' in chainResult && <FieldError text={chainResult.error} />}
      </fieldset>
      <fieldset data-testid="limits-fields">
        <legend>Components, limits and progress</legend>
        <div class="form-row">
          <label>
            Components{' '}
            <select value={String(components)} onChange={(e) => setComponents(((v) => (v === 'auto' ? 'auto' : Number(v)))((e.target as HTMLSelectElement).value))}>
              <option value="auto">auto (cross-validation)</option>
              {[1, 2, 3, 4, 5, 6, 7, 8].map((n) => (
                <option key={n} value={n}>
                  {n}
                </option>
              ))}
            </select>
          </label>
          <label>
            Limit confidence{' '}
            <select value={String(conf)} onChange={(e) => setConf(Number((e.target as HTMLSelectElement).value))}>
              {[0.95, 0.99, 0.999].map((c) => (
                <option key={c} value={c}>
                  {confidence(c)}
                </option>
              ))}
            </select>
          </label>
          <label title="Alarms are raised at these limits; the charts draw the limit confidence. A good batch is judged at hundreds of points: at 99 % about one good batch in ten raises an alarm somewhere.">
            Alarm confidence{' '}
            <select value={String(Math.max(alarmConf, conf))} onChange={(e) => setAlarmConf(Number((e.target as HTMLSelectElement).value))} data-testid="alarm-confidence">
              {[0.99, 0.999, 0.9999]
                .filter((c) => c >= conf)
                .map((c) => (
                  <option key={c} value={c}>
                    {c === conf ? `${confidence(c)} (as drawn)` : confidence(c)}
                  </option>
                ))}
            </select>
          </label>
          <label title="Jackson–Mudholkar needs the discarded eigenvalues to give h0 > 0; where they do not, the build uses Box and says so.">
            Q limit{' '}
            <select value={qMethod} onChange={(e) => setQMethod((e.target as HTMLSelectElement).value as typeof qMethod)} data-testid="q-method">
              <option value="jackson-mudholkar">Jackson–Mudholkar (Box where undefined)</option>
              <option value="box">Box (g·χ²)</option>
            </select>
          </label>
          <label>
            Progress{' '}
            <select value={progress} onChange={(e) => setProgress((e.target as HTMLSelectElement).value as Progress)}>
              <option value="time">elapsed time</option>
              <option value="property" disabled={!prop.on}>
                the predicted property
              </option>
              <option value="pc1">the PC1 score</option>
            </select>
          </label>
          <label title="With progress on the predicted property or PC1: the time the batch takes to each progress point against the golden batches (a slowly drying or stalled batch sits inside its envelope otherwise). Not possible with progress as elapsed time.">
            <input type="checkbox" checked={pace && progress !== 'time'} disabled={progress === 'time'} onChange={(e) => setPace((e.target as HTMLInputElement).checked)} data-testid="judge-pace" /> judge the pace
            {progress === 'time' && <span class="muted small"> (needs progress on the property or PC1)</span>}
          </label>
        </div>
        {limitErrs.map((t) => (
          <FieldError key={t} text={t} />
        ))}
        <FieldError text={errors.limits} />
      </fieldset>
      <PropertyFields value={prop} onChange={setPropForm} known={known} knownNote={knownNote} errors={errors} />
      <EndpointRuleFields value={rule} onChange={setRule} unit={prop.on ? prop.unit : ''} errors={errors} />
      <div class="form-row">
        <button type="button" class="btn primary" disabled={busy} onClick={build} data-testid="build">
          {busy ? 'Building…' : 'Build draft model'}
        </button>
        {!me && <span class="muted small">Building needs the model-owner role.</span>}
        {Object.keys(errors).length > 0 && (
          <span class="field-error" role="status">
            The build was not started or was refused: see the sentences marked ▲ above.
          </span>
        )}
      </div>
      {error && <ErrorBox message={error} />}
      {preview && 'chain' in chainResult && <ChainPreview batch={preview} chain={chainResult.chain} />}
      <HistoryPanel chosen={chosen} chain={'chain' in chainResult ? chainResult.chain : null} components={components} />
    </div>
  );
}
