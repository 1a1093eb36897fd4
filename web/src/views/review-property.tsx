/** Review: the predicted property over the batch, with its target, the endpoint and the batch's lab values. */
import type uPlot from 'uplot';
import type { ModelVersionDetail, ResultRecord } from '../../../core/api/rest.ts';
import { Chart } from '../charts/chart.tsx';
import { linesOptions } from '../charts/chart-options.ts';
import { minutes, withUnit } from '../format/number-format.ts';
import { STYLE } from '../theme/palette.ts';
import { propertyChartData, propertyTarget, type LabPoint } from './review-property-data.ts';

export function PropertyOverTime({ rs, version, endpointMin, lab }: { rs: ResultRecord[]; version: ModelVersionDetail | null; endpointMin: number | null; lab: LabPoint[] }) {
  const p = rs.find((r) => r.prediction)?.prediction;
  if (!p) return null;
  const target = propertyTarget(version, rs);
  const data = propertyChartData(rs, lab);
  // The threshold (target cleared by a margin) sits close to the target: one label names both.
  const apart = target.threshold !== null && target.target !== null && target.threshold !== target.target;
  const lines = [
    ...(target.target !== null ? [{ value: target.target, label: apart ? '' : `target ${withUnit(target.target, p.unit)}`, style: STYLE.target }] : []),
    ...(apart ? [{ value: target.threshold!, label: `endpoint threshold ${withUnit(target.threshold, p.unit)} (target ${withUnit(target.target, p.unit)})`, style: STYLE.warnLimit }] : []),
  ];
  const yLabel = `${p.name} (${p.unit})`;
  return (
    <div class="panel" data-testid="property-chart">
      <h3>
        Predicted {p.name} over the batch <span class="sub">{lab.length ? `with ${lab.length} lab value${lab.length === 1 ? '' : 's'}` : 'no lab values for this batch'}</span>
      </h3>
      <Chart
        title={`Predicted ${p.name} and lab values against elapsed time`}
        height={220}
        optsKey={`prop-${rs.length}-${lab.length}-${target.target}-${endpointMin}`}
        data={data as unknown as uPlot.AlignedData}
        legend={[
          { style: STYLE.batch, label: `predicted ${p.name}` },
          ...(lab.length ? [{ style: STYLE.lab, label: `lab ${p.name} ■` }] : []),
          ...(target.target !== null ? [{ style: STYLE.target, label: `target ${withUnit(target.target, p.unit)}` }] : []),
          ...(apart ? [{ style: STYLE.warnLimit, label: `endpoint threshold ${withUnit(target.threshold, p.unit)}` }] : []),
          ...(endpointMin !== null ? [{ style: STYLE.selected, label: 'endpoint reached' }] : []),
        ]}
        make={(w, h) => {
          const o = linesOptions({
            width: w,
            height: h,
            xLabel: 'elapsed time (min)',
            yLabel,
            series: [
              { style: STYLE.batch, label: `predicted ${p.name}` },
              { style: STYLE.lab, label: `lab ${p.name}`, points: true },
            ],
            getLines: () => lines,
            getMarks: () => (endpointMin !== null ? [{ x: endpointMin, label: `endpoint ${minutes(endpointMin)}`, style: STYLE.selected }] : []),
          });
          // lab values are points only; the prediction is a line that bridges nothing
          o.series[2] = { ...o.series[2], stroke: STYLE.lab.stroke, width: 0, paths: () => null, points: { show: true, size: 9, fill: STYLE.lab.stroke, stroke: STYLE.lab.stroke } };
          o.series[1] = { ...o.series[1], spanGaps: true };
          return o;
        }}
      />
      {target.text && <p class="muted small">{target.text}</p>}
    </div>
  );
}
