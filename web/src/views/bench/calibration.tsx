/** Version page: cross-validation curve, loadings and the T²–Q plot of calibration spectra with exclude and refit. */
import { useState } from 'preact/hooks';
import type uPlot from 'uplot';
import type { CalibrationView, ModelVersionDetail } from '../../../../core/api/rest.ts';
import { api } from '../../api/endpoints.ts';
import { get } from '../../api/http.ts';
import { ApiError, errorText } from '../../api/problem.ts';
import { useAsync } from '../../components/use-async.ts';
import { Empty, ErrorBox, Loading } from '../../components/status.tsx';
import { Chart } from '../../charts/chart.tsx';
import { linesOptions } from '../../charts/chart-options.ts';
import { ScatterSvg } from '../../charts/scatter-svg.tsx';
import { limitName, sig } from '../../format/number-format.ts';
import { STYLE } from '../../theme/palette.ts';
import { href } from '../../router.ts';
import { MultiLine } from './chain-preview.tsx';

/** Cross-validation curve, loadings and the T²–Q plot of calibration spectra with exclude and refit. */
export function Calibration({ d }: { d: ModelVersionDetail }) {
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
