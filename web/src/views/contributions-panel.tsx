/** Contributions by wavelength for one spectrum, with band-assignment regions marked. */
import { useState } from 'preact/hooks';
import type uPlot from 'uplot';
import { api } from '../api/endpoints.ts';
import { useAsync } from '../components/use-async.ts';
import { Chart } from '../charts/chart.tsx';
import { contributionOptions } from '../charts/chart-options.ts';
import { ErrorBox, Loading } from '../components/status.tsx';
import { processTime } from '../format/number-format.ts';
import { STYLE } from '../theme/palette.ts';
import { contributionSeries, topShares } from './contribution-data.ts';
import { RegionShareTable } from './region-share-table.tsx';
import type { ContributionKind } from './contribution-data.ts';

export function ContributionsPanel({ batch, seq, onClose }: { batch: string; seq: number; onClose?: () => void }) {
  const res = useAsync(() => api.contributions(batch, seq), [batch, seq]);
  const [kind, setKind] = useState<ContributionKind>('q');
  const c = res.data?.contributions;
  return (
    <div class="panel contributions" data-testid="contributions-panel">
      <div class="panel-head">
        <h2>
          Contributions · spectrum #{seq}
          {res.data && <span class="sub"> at {processTime(res.data.t)}</span>}
        </h2>
        <span>
          {(['q', 't2', 'rbcQ', 'rbcT2'] as const).map((k) => (
            <label key={k} class="radio">
              <input type="radio" name="contrib-kind" checked={kind === k} onChange={() => setKind(k)} /> {KIND_LABEL[k]}
            </label>
          ))}
          {onClose && (
            <button type="button" class="btn small" onClick={onClose}>
              Close
            </button>
          )}
        </span>
      </div>
      {res.loading && !c && <Loading what="contributions" />}
      {res.error && <ErrorBox message={res.error} onRetry={res.reload} />}
      {c && (
        <>
          <Chart
            key={kind}
            title={`${KIND_LABEL[kind]} by wavelength`}
            height={220}
            optsKey={`contrib-${kind}-${seq}`}
            data={contributionSeries(c, kind) as unknown as uPlot.AlignedData}
            legend={[{ style: { ...STYLE.batch, fill: 'rgba(0,114,178,0.55)' }, label: KIND_LABEL[kind] }]}
            make={(w, h) =>
              contributionOptions({ width: w, height: h, xLabel: 'wavelength (nm)', yLabel: KIND_LABEL[kind], label: KIND_LABEL[kind], getRegions: () => c.regions })
            }
          />
          <RegionShareTable caption="Largest regions (band assignments)" rows={topShares(c, kind === 't2' || kind === 'rbcT2' ? 't2' : 'q', 5)} totalRegions={c.regions.length} />
        </>
      )}
    </div>
  );
}

const KIND_LABEL: Record<ContributionKind, string> = {
  q: 'Q contribution (e²)',
  t2: 'T² contribution',
  rbcQ: 'Q reconstruction-based',
  rbcT2: 'T² reconstruction-based',
};
