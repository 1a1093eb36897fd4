/** Model bench: raw spectra of one batch before and after the preprocessing chain, and a plain multi-line chart. */
import { useMemo } from 'preact/hooks';
import type uPlot from 'uplot';
import type { ChainSpec } from '../../../../core/preprocess/index.ts';
import { fitChain } from '../../../../core/preprocess/index.ts';
import { matrixFromRows, matrixRow } from '../../../../core/linalg/dense-matrix.ts';
import { api } from '../../api/endpoints.ts';
import { errorText } from '../../api/problem.ts';
import { useAsync } from '../../components/use-async.ts';
import { ErrorBox, Loading } from '../../components/status.tsx';
import { Chart } from '../../charts/chart.tsx';
import { linesOptions } from '../../charts/chart-options.ts';
import { spreadIndices } from '../bench-data.ts';
import { sortedByAxis } from '../spectrum-data.ts';
import { COMPARE_STYLES } from '../../theme/palette.ts';
import type { SeriesStyle } from '../../theme/palette.ts';

/** Raw spectra of one batch and the same spectra after the chain (fitted on that batch for the preview). */
export function ChainPreview({ batch, chain }: { batch: string; chain: ChainSpec }) {
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

export function MultiLine({ title, axis, rows, labels, xLabel, yLabel, yLog }: { title: string; axis: number[]; rows: number[][]; labels: string[]; xLabel: string; yLabel: string; yLog?: boolean }) {
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
