/** Version page: explained variance per component and cumulative. */
import type uPlot from 'uplot';
import type { ModelVersionDetail } from '../../../../core/api/rest.ts';
import { Chart } from '../../charts/chart.tsx';
import { linesOptions } from '../../charts/chart-options.ts';
import { percent } from '../../format/number-format.ts';
import { STYLE } from '../../theme/palette.ts';

export function ExplainedChart({ d }: { d: ModelVersionDetail }) {
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
