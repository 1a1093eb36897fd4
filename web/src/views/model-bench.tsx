/** Model bench: choose reference batches, preview the chain, build, inspect, evaluate, approve, deploy. */
import { useMemo, useState } from 'preact/hooks';
import type uPlot from 'uplot';
import type { BatchSummary, ModelEnvelopeView, ModelVersionDetail, EvaluationResult } from '../../../core/api/rest.ts';
import type { ChainSpec } from '../../../core/preprocess/index.ts';
import { fitChain, validateChainSpec } from '../../../core/preprocess/index.ts';
import { matrixFromRows, matrixRow } from '../../../core/linalg/dense-matrix.ts';
import { api } from '../api/endpoints.ts';
import { get } from '../api/http.ts';
import { ApiError, errorText } from '../api/problem.ts';
import type { CalibrationView } from '../../../core/api/rest.ts';
import type { Me } from '../api/session.ts';
import { useAsync } from '../components/use-async.ts';
import { Advisory, Badge, Empty, ErrorBox, Loading } from '../components/status.tsx';
import { Chart } from '../charts/chart.tsx';
import { linesOptions, scoreChartOptions } from '../charts/chart-options.ts';
import { ScatterSvg } from '../charts/scatter-svg.tsx';
import { useEnvelope } from './use-envelope.ts';
import { CHAIN_PRESETS, buildSettingsFromForm, parseEndpointMark, spreadIndices, summariseEvaluation, type EndpointMark } from './bench-data.ts';
import { progressLabel, scoreBand } from './watch-data.ts';
import { sortedByAxis } from './spectrum-data.ts';
import { confidence, dateTime, fixed, limitName, minutes, percent, sig } from '../format/number-format.ts';
import { COMPARE_STYLES, STYLE } from '../theme/palette.ts';
import type { SeriesStyle } from '../theme/palette.ts';
import { href } from '../router.ts';

/** Model names are ids: letters, digits and . _ : - only. */
export function modelName(s: string): string {
  return s.trim().replace(/[^A-Za-z0-9._:-]+/g, '-').slice(0, 128);
}

export function ModelBench({ version, me }: { version: string | null; me: Me | null }) {
  return (
    <section class="view bench">
      <header class="view-head">
        <h1>Model bench</h1>
        <nav class="head-facts">
          <a href={href({ view: 'bench', version: null })}>new model</a>
        </nav>
      </header>
      <div class="bench-grid">
        <aside>
          <ModelList current={version} />
        </aside>
        <div>{version ? <VersionDetail key={version} version={version} me={me} /> : <Builder me={me} />}</div>
      </div>
    </section>
  );
}

function ModelList({ current }: { current: string | null }) {
  const models = useAsync(() => api.models(), []);
  return (
    <div class="panel">
      <h2>Models</h2>
      {models.loading && !models.data && <Loading what="models" />}
      {models.error && <ErrorBox message={models.error} onRetry={models.reload} />}
      {models.data && models.data.items.length === 0 && <p class="muted">No models yet. Build the first from reference batches.</p>}
      <ul class="model-list">
        {models.data?.items.map((m) => (
          <li key={m.name}>
            <b>{m.name}</b> <span class="muted">{m.product}</span>
            <ul>
              {m.versions.map((v) => (
                <li key={v.versionId} class={v.versionId === current ? 'current' : ''}>
                  <a href={href({ view: 'bench', version: v.versionId })}>
                    v{v.version} <StatusBadge status={v.status} />
                    {v.deployedTo.length > 0 && <span class="muted small"> on {v.deployedTo.join(', ')}</span>}
                  </a>
                </li>
              ))}
            </ul>
          </li>
        ))}
      </ul>
    </div>
  );
}

function StatusBadge({ status }: { status: 'draft' | 'approved' | 'retired' }) {
  return <Badge tone={status === 'approved' ? 'ok' : status === 'draft' ? 'info' : 'muted'}>{status}</Badge>;
}

function Builder({ me }: { me: Me | null }) {
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
  const [error, setError] = useState<string | null>(null);
  const [busy, setBusy] = useState(false);
  const [preview, setPreview] = useState<string | null>(null);
  // Endpoint of each reference batch as typed (empty: lab values crossing the target decide).
  const [ends, setEnds] = useState<Record<string, string>>({});

  const products = useMemo(() => [...new Set((batches.data?.items ?? []).map((b) => b.product))].sort(), [batches.data]);
  const shown = (batches.data?.items ?? []).filter((b) => !product || b.product === product);
  const chainResult = useMemo((): { chain: ChainSpec } | { error: string } => {
    try {
      const raw = preset === 'custom' ? JSON.parse(custom) : CHAIN_PRESETS.find((p) => p.id === preset)!.chain;
      return { chain: validateChainSpec(raw) };
    } catch (e) {
      return { error: e instanceof SyntaxError ? `The chain is not valid JSON: ${e.message}` : errorText(e) };
    }
  }, [preset, custom]);

  const build = async () => {
    setError(null);
    if (!('chain' in chainResult)) return setError(chainResult.error);
    if (chosen.length < 2) return setError('Choose at least two reference batches.');
    const prod = product || shown.find((b) => chosen.includes(b.id))?.product || '';
    let marks: EndpointMark[];
    try {
      marks = chosen.map((b) => parseEndpointMark(b, ends[b] ?? '')).filter((m): m is EndpointMark => m !== null);
    } catch (e) {
      return setError(errorText(e));
    }
    setBusy(true);
    try {
      const v = await api.build({
        name: modelName(name || `${prod}-model`),
        product: prod,
        referenceBatches: chosen,
        settings: buildSettingsFromForm({ chain: chainResult.chain, components, confidence: conf, alarmConfidence: Math.max(alarmConf, conf), referenceEndpoints: marks }),
      });
      location.hash = href({ view: 'bench', version: v.versionId });
    } catch (e) {
      setError(errorText(e));
    } finally {
      setBusy(false);
    }
  };

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
      <fieldset class="batch-pick">
        <legend>Reference batches (good batches only) — {chosen.length} chosen</legend>
        {batches.data && shown.length === 0 && <p class="muted">No finished batches{product ? ` of ${product}` : ''}.</p>}
        <table class="batch-table">
          <thead>
            <tr>
              <th scope="col">use</th>
              <th scope="col">batch</th>
              <th scope="col">unit</th>
              <th scope="col">product</th>
              <th scope="col">started</th>
              <th scope="col" class="num">spectra</th>
              <th scope="col" class="num">alarms</th>
              <th scope="col">endpoint</th>
              <th scope="col">preview</th>
            </tr>
          </thead>
          <tbody>
            {shown.map((b) => (
              <tr key={b.id}>
                <td>
                  <input
                    type="checkbox"
                    aria-label={`use ${b.id}`}
                    data-testid={`ref-${b.id}`}
                    checked={chosen.includes(b.id)}
                    onChange={(e) => setChosen((c) => ((e.target as HTMLInputElement).checked ? [...c, b.id] : c.filter((x) => x !== b.id)))}
                  />
                </td>
                <td>{b.id}</td>
                <td>{b.unit}</td>
                <td>{b.product}</td>
                <td>{dateTime(b.startedAt)}</td>
                <td class="num">{b.spectrumCount}</td>
                <td class="num">{b.alarmCount > 0 ? <Badge tone="warn">{b.alarmCount}</Badge> : '0'}</td>
                <td>
                  <input
                    class="endpoint-mark"
                    size={9}
                    aria-label={`endpoint of ${b.id}`}
                    data-testid={`end-${b.id}`}
                    placeholder="lab values"
                    value={ends[b.id] ?? ''}
                    onInput={(e) => setEnds((m) => ({ ...m, [b.id]: (e.target as HTMLInputElement).value }))}
                  />
                </td>
                <td>
                  <button type="button" class="btn small" onClick={() => setPreview(b.id)}>
                    chain preview
                  </button>
                </td>
              </tr>
            ))}
          </tbody>
        </table>
        <p class="muted small">
          Endpoint: where the batch really reached its end. Empty takes it from lab values crossing the target; otherwise give minutes from the batch start (52.5), a
          spectrum (#316), or "last" only if the batch really ended at its last spectrum — operators stop late, so the last spectrum is never taken as the endpoint
          unless you say so. Rules with automatic thresholds (moving-block SD, plateau, golden end) are calibrated at these endpoints and need one for every
          reference batch. Tideline advises; the site's validated control strategy, interlocks and procedures decide what an endpoint signal may do.
        </p>
      </fieldset>
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
        {'error' in chainResult && <ErrorBox message={chainResult.error} />}
      </fieldset>
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
        <button type="button" class="btn primary" disabled={busy} onClick={build} data-testid="build">
          {busy ? 'Building…' : 'Build draft model'}
        </button>
        {!me && <span class="muted small">Building needs the model-owner role.</span>}
      </div>
      {error && <ErrorBox message={error} />}
      {preview && 'chain' in chainResult && <ChainPreview batch={preview} chain={chainResult.chain} />}
    </div>
  );
}

/** Raw spectra of one batch and the same spectra after the chain (fitted on that batch for the preview). */
function ChainPreview({ batch, chain }: { batch: string; chain: ChainSpec }) {
  const spectra = useAsync(() => api.spectra(batch, { limit: 400 }), [batch]);
  const result = useMemo((): { error: string } | { raw: { axis: number[]; rows: number[][]; seqs: number[] }; pre: { axis: number[]; rows: number[][] } } | null => {
    const r = spectra.data;
    if (!r || r.items.length === 0) return null;
    try {
      const X = matrixFromRows(r.items.map((s) => s.values));
      const fitted = fitChain(chain, r.axis, X);
      const idx = spreadIndices(r.items.length, 5);
      return {
        raw: { axis: r.axis, rows: idx.map((i) => r.items[i].values), seqs: idx.map((i) => r.items[i].seq) },
        pre: { axis: Array.from(fitted.outputAxis), rows: idx.map((i) => Array.from(fitted.apply(matrixRow(X, i)))) },
      };
    } catch (e) {
      return { error: errorText(e) };
    }
  }, [spectra.data, chain]);
  return (
    <div class="panel" data-testid="chain-preview">
      <h3>Chain preview · batch {batch}</h3>
      {spectra.loading && <Loading what="spectra" />}
      {spectra.error && <ErrorBox message={spectra.error} />}
      {result && 'error' in result && <ErrorBox message={`The chain cannot be applied: ${result.error}`} />}
      {result && 'raw' in result && (
        <div class="two-col">
          <MultiLine title="before: raw absorbance" axis={result.raw.axis} rows={result.raw.rows} labels={result.raw.seqs.map((s) => `#${s}`)} xLabel="wavelength (nm)" yLabel="absorbance" />
          <MultiLine title="after the chain" axis={result.pre.axis} rows={result.pre.rows} labels={result.raw.seqs.map((s) => `#${s}`)} xLabel="wavelength (nm)" yLabel="preprocessed value" />
        </div>
      )}
      <p class="muted small">Five spectra spread over the batch, first to last. The preview fits centring/scaling on this batch alone; the model fits them on all reference batches.</p>
    </div>
  );
}

function MultiLine({ title, axis, rows, labels, xLabel, yLabel, yLog }: { title: string; axis: number[]; rows: number[][]; labels: string[]; xLabel: string; yLabel: string; yLog?: boolean }) {
  const s = sortedByAxis(axis, rows);
  const styles: SeriesStyle[] = rows.map((_, i) => COMPARE_STYLES[i % COMPARE_STYLES.length]);
  return (
    <Chart
      title={title}
      height={200}
      optsKey={`${title}-${rows.length}-${axis.length}`}
      data={[s.axis, ...s.series] as unknown as uPlot.AlignedData}
      legend={styles.map((st, i) => ({ style: st, label: labels[i] }))}
      make={(w, h) => linesOptions({ width: w, height: h, xLabel, yLabel, yLog, series: styles.map((st, i) => ({ style: st, label: labels[i] })) })}
    />
  );
}

function VersionDetail({ version, me }: { version: string; me: Me | null }) {
  const detail = useAsync(() => api.modelVersion(version), [version]);
  const { env, withReferences: envWithRefs } = useEnvelope(version);
  const d = detail.data;
  if (detail.loading && !d) return <Loading what="model version" />;
  if (detail.error) return <ErrorBox message={detail.error} onRetry={detail.reload} />;
  if (!d) return null;
  return (
    <div class="version" data-testid="version-detail">
      <div class="panel">
        <div class="panel-head">
          <h2>
            {d.name} v{d.version} <StatusBadge status={d.status} />
          </h2>
          <span class="muted small mono" title="content hash (SHA-256)">
            {d.sha256.slice(0, 16)}…
          </span>
        </div>
        <dl class="facts inline">
          <dt>Product</dt>
          <dd>{d.product}</dd>
          <dt>Built</dt>
          <dd>
            {dateTime(d.createdAt)} by {d.createdBy}
          </dd>
          <dt>Reference batches</dt>
          <dd>{d.referenceBatches.join(', ')}</dd>
          <dt>Components</dt>
          <dd>{d.components}</dd>
          <dt>Limits</dt>
          <dd>
            {limitName('T²', d.limits.confidence)} = {sig(d.limits.t2)} ({d.limits.t2Method}); {limitName('Q', d.limits.confidence)} = {sig(d.limits.q)} ({d.limits.qMethod})
          </dd>
          {d.alarmLimits && (
            <>
              <dt>Alarm limits</dt>
              <dd data-testid="alarm-limits">
                {limitName('T²', d.alarmLimits.confidence, 'alarm limit')} = {sig(d.alarmLimits.t2)}; {limitName('Q', d.alarmLimits.confidence, 'alarm limit')} = {sig(d.alarmLimits.q)}; envelope alarm at ±{sig(d.alarmLimits.envelopeK)} sd — {d.alarmLimits.envelopeKMethod}. The charts draw the {confidence(d.limits.confidence)} limits; alarms are raised at these.
              </dd>
            </>
          )}
          {d.approvedAt && (
            <>
              <dt>Approved</dt>
              <dd>
                {dateTime(d.approvedAt)} by {d.approvedBy}: “{d.approvalReason}”
              </dd>
            </>
          )}
          {d.deployedTo.length > 0 && (
            <>
              <dt>Deployed to</dt>
              <dd>{d.deployedTo.join(', ')}</dd>
            </>
          )}
        </dl>
      </div>
      <div class="two-col">
        <ExplainedChart d={d} />
        <Calibration d={d} />
      </div>
      <EnvelopePreview env={envWithRefs} error={env.error} />
      <Evaluation d={d} onDone={detail.reload} />
      <div class="two-col">
        <Approve d={d} me={me} onDone={detail.reload} />
        <Deploy d={d} onDone={detail.reload} />
      </div>
    </div>
  );
}

function ExplainedChart({ d }: { d: ModelVersionDetail }) {
  const x = d.explained.map((_, i) => i + 1);
  const per = d.explained.map((v) => v * 100);
  const cum = d.cumulative.map((v) => v * 100);
  const styles = [
    { style: { ...STYLE.batch, marker: 'circle' as const }, label: 'explained by the component (%)', points: true },
    { style: { ...STYLE.goldenMean, marker: 'square' as const }, label: 'cumulative (%)', points: true },
  ];
  return (
    <div class="panel">
      <h3>Explained variance</h3>
      <Chart
        testId="explained-chart"
        title="Explained variance per component and cumulative"
        height={220}
        optsKey={`explained-${d.versionId}`}
        data={[x, per, cum] as unknown as uPlot.AlignedData}
        legend={styles}
        make={(w, h) => linesOptions({ width: w, height: h, xLabel: 'component', yLabel: 'variance explained (%)', series: styles, integerX: true })}
      />
      <p class="small">
        {d.components} components explain {percent(d.cumulative[d.components - 1], 1)} of the variance after preprocessing.
      </p>
    </div>
  );
}

/** Cross-validation curve, loadings and the T²–Q plot of calibration spectra with exclude and refit. */
function Calibration({ d }: { d: ModelVersionDetail }) {
  const cal = useAsync(async () => {
    try {
      return await get<CalibrationView>(`/api/models/versions/${encodeURIComponent(d.versionId)}/calibration`);
    } catch (e) {
      if (e instanceof ApiError && e.status === 404) return null;
      throw e;
    }
  }, [d.versionId]);
  const [excluded, setExcluded] = useState<Set<string>>(new Set());
  const [error, setError] = useState<string | null>(null);
  const [busy, setBusy] = useState(false);
  const c = cal.data;
  if (cal.loading && c === null) return <Loading what="calibration diagnostics" />;
  if (cal.error) return <ErrorBox message={cal.error} onRetry={cal.reload} />;
  if (!c)
    return (
      <div class="panel">
        <h3>Calibration diagnostics</h3>
        <Empty>This server does not provide calibration diagnostics (cross-validation curve, loadings, T²–Q of the calibration spectra) for model versions.</Empty>
      </div>
    );
  const key = (s: { batch: string; index: number }) => `${s.batch}#${s.index}`;
  const toggle = (k: string) => setExcluded((old) => ((n) => (n.has(k) ? n.delete(k) : n.add(k), n))(new Set(old)));
  const refit = async () => {
    setBusy(true);
    setError(null);
    try {
      const exclude = c.samples.filter((s) => s.excluded || excluded.has(key(s))).map((s) => ({ batch: s.batch, index: s.index }));
      const settings: Record<string, unknown> = { ...d.settings, excludeSpectra: exclude };
      for (const k of ['name', 'product', 'author', 'createdAt']) delete settings[k];
      const v = await api.build({ name: d.name, product: d.product, referenceBatches: d.referenceBatches, settings });
      location.hash = href({ view: 'bench', version: v.versionId });
    } catch (e) {
      setError(errorText(e));
    } finally {
      setBusy(false);
    }
  };
  const cvStyles = [{ style: { ...STYLE.batch, marker: 'circle' as const }, label: 'PRESS (cross-validation)', points: true }];
  return (
    <div class="panel">
      <h3>Cross-validation</h3>
      <Chart
        title="Cross-validation PRESS against number of components"
        height={180}
        optsKey={`cv-${d.versionId}`}
        data={[c.press.map((_, i) => i + 1), c.press] as unknown as uPlot.AlignedData}
        legend={cvStyles}
        make={(w, h) => linesOptions({ width: w, height: h, xLabel: 'components', yLabel: 'PRESS', series: cvStyles, integerX: true })}
      />
      <p class="small">Recommended: {c.recommended} components; this version uses {d.components}.</p>
      <h3>Loadings</h3>
      <MultiLine title="loadings" axis={c.modelAxis} rows={c.loadings} labels={c.loadings.map((_, i) => `PC${i + 1}`)} xLabel="wavelength (nm)" yLabel="loading" />
      <h3>Calibration spectra: T² against Q</h3>
      <ScatterSvg
        testId="t2q-plot"
        points={c.samples.map((s) => ({ x: s.t2, y: s.q, key: key(s), title: `${s.batch} spectrum ${s.index}: T² ${sig(s.t2)}, Q ${sig(s.q)}`, excluded: s.excluded || excluded.has(key(s)) }))}
        xLabel="Hotelling T²"
        yLabel="Q (SPE)"
        xLimit={{ value: c.limits.t2, label: limitName('T²', c.limits.confidence) }}
        yLimit={{ value: c.limits.q, label: limitName('Q', c.limits.confidence) }}
        onToggle={toggle}
      />
      <p class="small">Click a point to mark it for exclusion; refitting builds a new draft version without the marked spectra.</p>
      <button type="button" class="btn" disabled={busy || excluded.size === 0} onClick={refit}>
        Refit without {excluded.size} marked spectra
      </button>
      {error && <ErrorBox message={error} />}
    </div>
  );
}

function EnvelopePreview({ env, error }: { env: ModelEnvelopeView | null; error: string | null }) {
  if (error) return <ErrorBox message={`Envelope: ${error}`} />;
  if (!env) return <Loading what="envelope" />;
  return (
    <div class="panel" data-testid="envelope-preview">
      <h3>Golden envelope preview</h3>
      <div class="two-col">
        {env.scores.slice(0, 4).map((s) => {
          const band = scoreBand(env, s.pc);
          const refs = env.references.map((r) => refScores(r, s.pc));
          const styles = refs.map((_, i) => ({ ...STYLE.reference, label: env.references[i].batch }));
          // Draw each reference on the envelope's progress axis (interpolated by position).
          const data = [env.progress, ...refs.map((r) => resampleTo(r.progress, r.values, env.progress))];
          return (
            <Chart
              key={s.pc}
              title={`PC${s.pc} golden envelope with reference batches`}
              height={200}
              optsKey={`env-${env.versionId}-${s.pc}`}
              data={data as unknown as uPlot.AlignedData}
              legend={[{ style: STYLE.goldenMean }, { style: STYLE.envelope }, ...(refs.length ? [{ style: STYLE.reference, label: 'reference batches' }] : [])]}
              make={(w, h) => {
                const o = scoreChartOptions({ width: w, height: h, pc: s.pc, xLabel: progressLabel(env), yLabel: `PC${s.pc} score`, getBand: () => band, getScores: () => [] });
                o.series = [{ label: 'progress' }, ...styles.map((st) => ({ label: st.label, stroke: st.stroke, width: 1, dash: st.dash, points: { show: false } }))];
                o.plugins = o.plugins!.slice(0, 1);
                return o;
              }}
            />
          );
        })}
      </div>
    </div>
  );
}

function refScores(r: ModelEnvelopeView['references'][number], pc: number): { progress: number[]; values: number[] } {
  const n = r.progress.length;
  const perPoint = r.scores.length === n && n > 0 && (r.scores[0]?.length ?? 0) !== n;
  return { progress: r.progress, values: perPoint ? r.scores.map((row) => row[pc - 1]) : (r.scores[pc - 1] ?? []) };
}

/** Linear interpolation of (x, y) onto `at`; NaN outside x's range. */
export function resampleTo(x: number[], y: number[], at: number[]): number[] {
  return at.map((p) => {
    if (x.length === 0 || p < x[0] || p > x[x.length - 1]) return NaN;
    let lo = 0;
    let hi = x.length - 1;
    while (hi - lo > 1) {
      const mid = (lo + hi) >> 1;
      if (x[mid] <= p) lo = mid;
      else hi = mid;
    }
    if (x[hi] === x[lo]) return y[lo];
    return y[lo] + ((p - x[lo]) / (x[hi] - x[lo])) * (y[hi] - y[lo]);
  });
}

function Evaluation({ d, onDone }: { d: ModelVersionDetail; onDone: () => void }) {
  const batches = useAsync(() => api.batches({ status: 'ended', product: d.product, limit: 500 }), [d.product]);
  const held = (batches.data?.items ?? []).filter((b) => !d.referenceBatches.includes(b.id));
  const [chosen, setChosen] = useState<string[]>([]);
  const [faulty, setFaulty] = useState<Set<string>>(new Set());
  const [result, setResult] = useState<EvaluationResult | null>(d.evaluations[d.evaluations.length - 1] ?? null);
  const [error, setError] = useState<string | null>(null);
  const [busy, setBusy] = useState(false);
  const starts = new Map((batches.data?.items ?? []).map((b: BatchSummary) => [b.id, b.startedAt]));
  const run = async () => {
    setBusy(true);
    setError(null);
    try {
      setResult(await api.evaluate(d.versionId, chosen));
      onDone();
    } catch (e) {
      setError(errorText(e));
    } finally {
      setBusy(false);
    }
  };
  const sum = result ? summariseEvaluation(result, faulty, starts) : null;
  return (
    <div class="panel" data-testid="evaluation">
      <h3>Evaluation on held-out batches</h3>
      {batches.error && <ErrorBox message={batches.error} />}
      {batches.data && held.length === 0 && <p class="muted">No finished batches of {d.product} outside the reference set.</p>}
      {held.length > 0 && (
        <table class="batch-table">
          <thead>
            <tr>
              <th scope="col">evaluate</th>
              <th scope="col">batch</th>
              <th scope="col">known faulty</th>
              <th scope="col" class="num">spectra</th>
            </tr>
          </thead>
          <tbody>
            {held.map((b) => (
              <tr key={b.id}>
                <td>
                  <input type="checkbox" aria-label={`evaluate ${b.id}`} checked={chosen.includes(b.id)} onChange={(e) => setChosen((c) => ((e.target as HTMLInputElement).checked ? [...c, b.id] : c.filter((x) => x !== b.id)))} />
                </td>
                <td>{b.id}</td>
                <td>
                  <input type="checkbox" aria-label={`${b.id} is known faulty`} checked={faulty.has(b.id)} onChange={() => setFaulty((f) => ((n) => (n.has(b.id) ? n.delete(b.id) : n.add(b.id), n))(new Set(f)))} />
                </td>
                <td class="num">{b.spectrumCount}</td>
              </tr>
            ))}
          </tbody>
        </table>
      )}
      <button type="button" class="btn" disabled={busy || chosen.length === 0} onClick={run}>
        {busy ? 'Evaluating…' : `Evaluate on ${chosen.length} batches`}
      </button>
      {error && <ErrorBox message={error} />}
      {result && sum && (
        <>
          <dl class="facts inline">
            <dt>False-alarm rate (good batches with an alarm)</dt>
            <dd>{sum.good.falseAlarmRate === null ? 'no good batches evaluated' : `${sum.good.withAlarm} of ${sum.good.batches} (${percent(sum.good.falseAlarmRate)})`}</dd>
            <dt>Single points outside limits (good batches)</dt>
            <dd>{percent(sum.good.pointsOutsideRate, 1)}</dd>
            <dt>Detection (known faulty)</dt>
            <dd>{sum.faulty.batches ? `${sum.faulty.detected} of ${sum.faulty.batches}; mean delay from batch start ${minutes(sum.faulty.meanDelayMin)}` : 'no batch marked faulty'}</dd>
            <dt>Endpoint reached</dt>
            <dd>
              {sum.endpoint.reached} of {sum.endpoint.batches}
            </dd>
          </dl>
          <table class="batch-table">
            <thead>
              <tr>
                <th scope="col">batch</th>
                <th scope="col" class="num">spectra</th>
                <th scope="col" class="num">points outside</th>
                <th scope="col" class="num">alarms</th>
                <th scope="col">first alarm</th>
                <th scope="col">endpoint at</th>
                <th scope="col" class="num">max T²</th>
                <th scope="col" class="num">max Q</th>
              </tr>
            </thead>
            <tbody>
              {result.batches.map((b) => (
                <tr key={b.batch}>
                  <td>
                    {b.batch} {faulty.has(b.batch) && <Badge tone="warn">faulty</Badge>}
                  </td>
                  <td class="num">{b.spectra}</td>
                  <td class="num">{b.pointsOutside}</td>
                  <td class="num">{b.alarms}</td>
                  <td>{b.firstAlarmAt ? `${minutes((b.firstAlarmAt - (starts.get(b.batch) ?? b.firstAlarmAt)) / 60000)} (${b.firstAlarmKind})` : '—'}</td>
                  <td>{b.endpointAt ? minutes((b.endpointAt - (starts.get(b.batch) ?? b.endpointAt)) / 60000) : 'not reached'}</td>
                  <td class="num">{sig(b.maxT2)}</td>
                  <td class="num">{sig(b.maxQ)}</td>
                </tr>
              ))}
            </tbody>
          </table>
          <p class="muted small">
            Evaluated {dateTime(result.createdAt)} by {result.createdBy}. Times are from batch start; endpoint error needs the true endpoint, which the server records only for simulated batches ({fixed(result.batches.length, 0)} batches here).
          </p>
        </>
      )}
    </div>
  );
}

function Approve({ d, me, onDone }: { d: ModelVersionDetail; me: Me | null; onDone: () => void }) {
  const [reason, setReason] = useState('');
  const [override, setOverride] = useState('');
  const [password, setPassword] = useState('');
  // The leave-one-batch-out endpoint check: a rule that reached done early on a reference batch
  // needs a signed override reason.
  const early = (d.endpointCheck?.rows ?? []).filter((r) => r.verdict === 'early');
  const [error, setError] = useState<string | null>(null);
  const [busy, setBusy] = useState(false);
  if (d.status !== 'draft')
    return (
      <div class="panel">
        <h3>Approval</h3>
        <p>
          This version is <StatusBadge status={d.status} />. An approved version cannot change; build a new version to change anything.
        </p>
      </div>
    );
  return (
    <form
      class="panel"
      data-testid="approve"
      onSubmit={async (e) => {
        e.preventDefault();
        setBusy(true);
        setError(null);
        try {
          await api.approve(d.versionId, reason, password || undefined, early.length ? override : undefined);
          onDone();
        } catch (err) {
          setError(errorText(err));
        } finally {
          setBusy(false);
        }
      }}
    >
      <h3>Approve this version</h3>
      <p class="small">
        Approving signs the version (hash {d.sha256.slice(0, 12)}…) as {me ? `${me.user.fullName} (${me.user.role})` : 'the signed-in user'}. It then cannot change.
      </p>
      <label class="block">
        Reason (required){' '}
        <textarea rows={2} required value={reason} onInput={(e) => setReason((e.target as HTMLTextAreaElement).value)} placeholder="e.g. evaluated on 4 held-out good and 2 faulty batches; no false alarms" />
      </label>
      {early.length > 0 && (
        <div class="early-endpoint" data-testid="early-endpoint">
          <p class="small">
            <Badge tone="warn">early endpoint</Badge> Replayed leave-one-batch-out, the endpoint rule reached done before the known endpoint on {early.length} of{' '}
            {d.endpointCheck!.rows.length} reference batches:{' '}
            {early.map((r) => `${r.batch} ${-r.intervals!} interval${r.intervals === -1 ? '' : 's'} (${fixed(-r.minutes!, 1)} min) early${r.withinBracket ? ', inside its lab bracket' : ''}`).join('; ')}. An endpoint signal may stop the unit:
            approving this rule needs your reason, signed with the approval.
          </p>
          <label class="block">
            Override reason (required){' '}
            <textarea rows={2} required value={override} onInput={(e) => setOverride((e.target as HTMLTextAreaElement).value)} placeholder="why this rule may be used although it fires early on reference batches" />
          </label>
        </div>
      )}
      <label class="block">
        Password (re-enter to sign) <input type="password" autocomplete="current-password" value={password} onInput={(e) => setPassword((e.target as HTMLInputElement).value)} />
      </label>
      <button class="btn primary" type="submit" disabled={busy || !reason.trim() || (early.length > 0 && !override.trim())}>
        Approve
      </button>
      {error && <ErrorBox message={error} />}
      <p class="muted small">A model must be validated under the site's quality system before it is used for release decisions.</p>
    </form>
  );
}

function Deploy({ d, onDone }: { d: ModelVersionDetail; onDone: () => void }) {
  const units = useAsync(() => api.units(), []);
  const [unit, setUnit] = useState('');
  const [reason, setReason] = useState('');
  const [error, setError] = useState<string | null>(null);
  const [done, setDone] = useState<string | null>(null);
  return (
    <form
      class="panel"
      data-testid="deploy"
      onSubmit={async (e) => {
        e.preventDefault();
        setError(null);
        try {
          const dep = await api.deploy(unit, d.versionId, reason || undefined);
          setDone(`Deployed to ${dep.unit}; batches started from now on are judged by v${d.version}.`);
          onDone();
        } catch (err) {
          setError(errorText(err));
        }
      }}
    >
      <h3>Deploy to a unit</h3>
      {d.status !== 'approved' && <p class="muted small">Only an approved version can be deployed.</p>}
      <label>
        Unit{' '}
        <select value={unit} onChange={(e) => setUnit((e.target as HTMLSelectElement).value)} required>
          <option value="">choose…</option>
          {units.data?.items.map((u) => (
            <option key={u.id} value={u.id}>
              {u.name} ({u.kind})
            </option>
          ))}
        </select>
      </label>
      <label class="block">
        Reason <input value={reason} onInput={(e) => setReason((e.target as HTMLInputElement).value)} />
      </label>
      <button class="btn" type="submit" disabled={d.status !== 'approved' || !unit}>
        Deploy
      </button>
      {done && <p role="status">{done}</p>}
      {error && <ErrorBox message={error} />}
      <Advisory />
    </form>
  );
}
