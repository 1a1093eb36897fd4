/** Version page: the property (PLS) model's evidence — LVs and the rule that chose them, RMSECV, bias, range, lab values used. */
import type uPlot from 'uplot';
import type { PropertyModelView } from '../../../../core/api/rest.ts';
import { Badge } from '../../components/status.tsx';
import { Chart } from '../../charts/chart.tsx';
import { linesOptions } from '../../charts/chart-options.ts';
import { confidence, sig, withUnit } from '../../format/number-format.ts';
import { OKABE_ITO, STYLE } from '../../theme/palette.ts';
import { limitMethodName, plainText } from '../../../../core/vocabulary/plain-names.ts';

export function PropertyEvidencePanel({ p }: { p: PropertyModelView | null }) {
  if (!p) {
    return (
      <div class="panel" data-testid="property-evidence">
        <h3>Property model</h3>
        <p class="muted">This version has no property model: the endpoint rule cannot watch a predicted property.</p>
      </div>
    );
  }
  const lvs = p.rmsecv.map((_, i) => i + 1);
  const chosen = p.components;
  const u = p.unit;
  return (
    <div class="panel" data-testid="property-evidence">
      <h3>
        Property model · {p.name} <span class="sub">({u})</span>
      </h3>
      <dl class="facts">
        <dt>Latent variables</dt>
        <dd data-testid="property-lvs">
          {chosen} — {p.componentsRule}
          {p.atSearchLimit && (
            <Badge tone="warn" title="The rule chose the largest number searched: more might predict better, or the model is fitting noise.">
              at the search limit
            </Badge>
          )}
        </dd>
        <dt>RMSECV</dt>
        <dd data-testid="property-rmsecv">
          {withUnit(p.rmsecv[chosen - 1], u)} with {chosen} LV{chosen === 1 ? '' : 's'} (the mean alone: {withUnit(p.rmsecv0, u)})
        </dd>
        <dt>Bias</dt>
        <dd>{withUnit(p.bias[chosen - 1], u)} (mean cross-validated residual, predicted − lab)</dd>
        <dt>Cross-validation</dt>
        <dd>{p.cvMethod}</dd>
        <dt>Lab values used</dt>
        <dd data-testid="property-lab">
          {p.nLabValues} from {p.nBatchesWithLab} of {p.nBatches} reference batches
          {p.batchesWithoutLab.length > 0 && <span class="muted"> (none on {p.batchesWithoutLab.join(', ')})</span>}
        </dd>
        <dt>Calibration range</dt>
        <dd>
          {sig(p.calibrationRange[0])} to {withUnit(p.calibrationRange[1], u)}
          {p.restrictedTo && ` (calibrated on lab values from ${sig(p.restrictedTo[0])} to ${withUnit(p.restrictedTo[1], u)} only)`}
        </dd>
        {p.target !== null && (
          <>
            <dt>Target</dt>
            <dd>
              {p.direction === 'above' ? 'at or above' : 'at or below'} {withUnit(p.target, u)}
              {p.target < p.calibrationRange[0] || p.target > p.calibrationRange[1] ? <Badge tone="warn">outside the calibration range</Badge> : null}
            </dd>
          </>
        )}
        <dt>Outside calibration</dt>
        <dd>
          flagged beyond the prediction's T² {sig(p.extrapolation.t2Limit)} or Q {sig(p.extrapolation.qLimit)} at {confidence(p.extrapolation.confidence)} overall — {plainText(p.extrapolation.method)} (
          {limitMethodName(p.extrapolation.t2Method)}; {limitMethodName(p.extrapolation.qMethod)})
        </dd>
      </dl>
      {lvs.length > 0 && (
        <div class="two-col">
          <Chart
            title="RMSECV and bias against the number of latent variables"
            height={200}
            optsKey={`rmsecv-${lvs.length}-${chosen}`}
            data={[lvs, p.rmsecv, p.bias] as unknown as uPlot.AlignedData}
            legend={[
              { style: STYLE.batch, label: `RMSECV (${u}) ●` },
              { style: { ...STYLE.goldenMean, stroke: OKABE_ITO.orange }, label: `bias (${u}) ◆` },
              { style: STYLE.selected, label: `chosen: ${chosen}` },
            ]}
            make={(w, h) =>
              linesOptions({
                width: w,
                height: h,
                xLabel: 'latent variables',
                yLabel: u,
                integerX: true,
                series: [
                  { style: STYLE.batch, label: 'RMSECV', points: true },
                  { style: { ...STYLE.goldenMean, stroke: OKABE_ITO.orange }, label: 'bias', points: true },
                ],
                getLines: () => [{ value: 0, label: '', style: { ...STYLE.reference, dash: [] } }],
                getMarks: () => [{ x: chosen, label: `chosen ${chosen}`, style: STYLE.selected }],
              })
            }
          />
          <table class="regions" data-testid="rmsecv-table">
            <caption>Cross-validated error per number of latent variables</caption>
            <thead>
              <tr>
                <th scope="col" class="num">LVs</th>
                <th scope="col" class="num">RMSECV ({u})</th>
                <th scope="col" class="num">bias ({u})</th>
              </tr>
            </thead>
            <tbody>
              <tr>
                <td class="num">0</td>
                <td class="num">{sig(p.rmsecv0)}</td>
                <td class="num">—</td>
              </tr>
              {lvs.map((a) => (
                <tr key={a} class={a === chosen ? 'current' : ''}>
                  <td class="num">
                    {a}
                    {a === chosen ? ' ◆' : ''}
                  </td>
                  <td class="num">{sig(p.rmsecv[a - 1])}</td>
                  <td class="num">{sig(p.bias[a - 1])}</td>
                </tr>
              ))}
            </tbody>
          </table>
        </div>
      )}
    </div>
  );
}
