/**
 * Version page: the health of a deployed version over the batches it judged (GET
 * /api/models/versions/:version/health): each test with its figures, the exact binomial intervals of
 * the T² and Q rates, and an EWMA chart per principal component with its limits.
 */
import type { HealthDriftChart, ModelHealth } from '../../../../core/api/model-life.ts';
import { api } from '../../api/endpoints.ts';
import { useAsync } from '../../components/use-async.ts';
import { Advisory, Badge, ErrorBox, Loading } from '../../components/status.tsx';
import { dateTime, percent } from '../../format/number-format.ts';
import { OKABE_ITO, STYLE } from '../../theme/palette.ts';
import { ewmaGeometry, testName, testStatus } from './model-life-data.ts';

export function ModelHealthPanel({ versionId, reloadKey }: { versionId: string; reloadKey: unknown }) {
  const h = useAsync(() => api.health(versionId), [versionId, reloadKey]);
  return (
    <div class="panel" data-testid="model-health">
      <h3>Model health</h3>
      {h.loading && !h.data && <Loading what="model health" />}
      {h.error && <ErrorBox message={h.error} onRetry={h.reload} />}
      {h.data && <HealthView h={h.data} />}
    </div>
  );
}

function HealthView({ h }: { h: ModelHealth }) {
  const pct = (v: number) => percent(v, 2);
  return (
    <>
      <p class="small">
        {h.batches.length} batch{h.batches.length === 1 ? '' : 'es'} judged by this version{h.units.length ? `; deployed on ${h.units.join(', ')}` : '; not deployed now'}. {h.method}
      </p>
      <table class="batch-table" data-testid="health-tests">
        <thead>
          <tr>
            <th scope="col">test</th>
            <th scope="col">result</th>
            <th scope="col">figures</th>
          </tr>
        </thead>
        <tbody>
          {h.tests.map((t) => {
            const s = testStatus(t);
            return (
              <tr key={t.code} data-testid={`health-${t.code}`}>
                <td>{testName(t.code)}</td>
                <td>
                  <Badge tone={s.tone}>{s.word}</Badge>
                </td>
                <td class="small">{t.text}</td>
              </tr>
            );
          })}
        </tbody>
      </table>
      {(h.t2 || h.q) && (
        <p class="small" data-testid="health-rates">
          {[h.t2, h.q].filter((r) => r !== null).map((r) => `${r!.name} alarm limit (${pct(r!.confidence)}${r!.limits === 'local' ? ', per point' : ''}, from ${r!.startupMin} min): ${r!.beyond} of ${r!.points} spectra beyond (${pct(r!.rate)}; exact 95 % interval ${pct(r!.interval[0])}–${pct(r!.interval[1])}; nominal ${pct(r!.nominal)}); ${r!.batches.left} of ${r!.batches.of} batches left it${r!.batches.baseline ? ` (before deployment ${r!.batches.baseline.left} of ${r!.batches.baseline.of})` : ''}`).join(' · ')}
        </p>
      )}
      {h.review.dueAt !== null && (
        <p class="small" data-testid="health-review">
          Periodic review due {dateTime(h.review.dueAt)} ({h.review.intervalDays} days after approval){h.review.overdue ? ' — overdue' : ''}.
        </p>
      )}
      {h.drift && h.drift.charts.length > 0 && h.batches.length === 0 && <p class="small muted">Drift: no batch judged by this version yet; the EWMA charts start with its first ended batch.</p>}
      {h.drift && h.drift.charts.length > 0 && h.batches.length > 0 && (
        <div data-testid="health-drift">
          <p class="small">{h.drift.method}</p>
          <div class="ewma-charts">
            {h.drift.charts.map((c) => (
              <EwmaChart key={c.pc} c={c} />
            ))}
          </div>
        </div>
      )}
      <Advisory text="Model health advises the model owner; the site's procedures decide whether a version stays in use." />
    </>
  );
}

const W = 260;
const H = 90;

function EwmaChart({ c }: { c: HealthDriftChart }) {
  const g = ewmaGeometry(c.ewma, c.limit, W, H);
  return (
    <figure class="ewma-chart" data-testid={`ewma-pc${c.pc}`}>
      <svg width={W + 40} height={H + 30} role="img" aria-label={`EWMA of the PC${c.pc} batch-mean score, ${c.signalling ? 'beyond' : 'within'} its limits at the latest batch`}>
        <g transform="translate(34,4)">
          <line x1={0} x2={W} y1={g.y(0)} y2={g.y(0)} stroke="#999" stroke-dasharray="2 3" />
          <polyline points={g.upper} fill="none" stroke={STYLE.limit.stroke} stroke-dasharray={STYLE.limit.dash.join(' ')} stroke-width={1.5} />
          <polyline points={g.lower} fill="none" stroke={STYLE.limit.stroke} stroke-dasharray={STYLE.limit.dash.join(' ')} stroke-width={1.5} />
          <polyline points={g.points} fill="none" stroke={OKABE_ITO.blue} stroke-width={1.5} />
          {c.ewma.map((v, i) =>
            Math.abs(v) > c.limit[i]! ? <path key={i} d={`M${g.x(i) - 4},${g.y(v) + 3} L${g.x(i) + 4},${g.y(v) + 3} L${g.x(i)},${g.y(v) - 4} Z`} fill={STYLE.outside.stroke} /> : <circle key={i} cx={g.x(i)} cy={g.y(v)} r={2} fill={OKABE_ITO.blue} />,
          )}
          <text x={-4} y={g.y(g.yMax * 0.9)} text-anchor="end" class="axis-label">{(g.yMax * 0.9).toFixed(1)}</text>
          <text x={-4} y={g.y(0) + 3} text-anchor="end" class="axis-label">0</text>
          <text x={W / 2} y={H + 22} text-anchor="middle" class="axis-label">batch (oldest → newest)</text>
          <text x={-28} y={H / 2} text-anchor="middle" class="axis-label" transform={`rotate(-90 -28 ${H / 2})`}>sd</text>
        </g>
      </svg>
      <figcaption class="small">
        PC{c.pc}: EWMA (blue, ● within, ▲ beyond) of the standardised batch-mean score, in sd; dashed: limits ±L·σ. {c.firstSignal !== null ? `First beyond at batch ${c.firstSignal + 1}.` : 'Never beyond.'}
      </figcaption>
    </figure>
  );
}
