/** Version page: the golden envelope of the first PCs with the reference batches drawn on it. */
import type uPlot from 'uplot';
import type { ModelEnvelopeView } from '../../../../core/api/rest.ts';
import { ErrorBox, Loading } from '../../components/status.tsx';
import { Chart } from '../../charts/chart.tsx';
import { scoreChartOptions } from '../../charts/chart-options.ts';
import { progressLabel, scoreBand } from '../watch-data.ts';
import { STYLE } from '../../theme/palette.ts';

export function EnvelopePreview({ env, error }: { env: ModelEnvelopeView | null; error: string | null }) {
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

export function refScores(r: ModelEnvelopeView['references'][number], pc: number): { progress: number[]; values: number[] } {
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
