/**
 * A small SVG scatter for up to a few thousand points that must be clickable (calibration samples on
 * the T²–Q plane). Limits are drawn as named dashed lines; excluded points are crosses, points
 * outside a limit are triangles, others circles — shape carries the meaning, colour helps.
 */
import { tickLabels } from './chart-options.ts';
import { STYLE } from '../theme/palette.ts';
import { Legend } from './chart.tsx';

export interface ScatterPoint {
  x: number;
  y: number;
  key: string;
  title: string;
  excluded?: boolean;
}

export function niceTicks(lo: number, hi: number, n = 5): number[] {
  if (!(hi > lo)) return [lo];
  const step0 = (hi - lo) / n;
  const mag = 10 ** Math.floor(Math.log10(step0));
  const step = [1, 2, 5, 10].map((m) => m * mag).find((s) => s >= step0) ?? 10 * mag;
  const out: number[] = [];
  for (let v = Math.ceil(lo / step) * step; v <= hi + step * 1e-9; v += step) out.push(Number(v.toPrecision(12)));
  return out;
}

function withLabels(ticks: number[]): [number, string][] {
  const l = tickLabels(ticks);
  return ticks.map((t, i) => [t, l[i]]);
}

export function ScatterSvg(p: {
  points: ScatterPoint[];
  xLabel: string;
  yLabel: string;
  xLimit?: { value: number; label: string };
  yLimit?: { value: number; label: string };
  width?: number;
  height?: number;
  onToggle?: (key: string) => void;
  testId?: string;
}) {
  const W = p.width ?? 520;
  const H = p.height ?? 320;
  const m = { l: 72, r: 16, t: 12, b: 44 };
  const xs = p.points.map((q) => q.x).concat(p.xLimit ? [p.xLimit.value] : []);
  const ys = p.points.map((q) => q.y).concat(p.yLimit ? [p.yLimit.value] : []);
  const xMax = Math.max(1e-12, ...xs.filter(Number.isFinite)) * 1.08;
  const yMax = Math.max(1e-12, ...ys.filter(Number.isFinite)) * 1.08;
  const X = (v: number) => m.l + (v / xMax) * (W - m.l - m.r);
  const Y = (v: number) => H - m.b - (v / yMax) * (H - m.t - m.b);
  const outside = (q: ScatterPoint) => (p.xLimit && q.x > p.xLimit.value) || (p.yLimit && q.y > p.yLimit.value);
  return (
    <figure class="chart" data-testid={p.testId}>
      <Legend
        items={[
          { style: { ...STYLE.batch, marker: 'circle' }, label: 'calibration spectrum' },
          { style: { ...STYLE.outside }, label: 'outside a limit ▲' },
          { style: STYLE.excluded, label: 'excluded ✕' },
          { style: STYLE.limit, label: 'limits' },
        ]}
      />
      <svg viewBox={`0 0 ${W} ${H}`} width="100%" role="img" aria-label={`${p.yLabel} against ${p.xLabel}`} class="scatter">
        <rect x={m.l} y={m.t} width={W - m.l - m.r} height={H - m.t - m.b} fill="#fff" stroke="#ccc" />
        {withLabels(niceTicks(0, xMax)).map(([t, label]) => (
          <g key={`x${t}`}>
            <line x1={X(t)} x2={X(t)} y1={m.t} y2={H - m.b} stroke="rgba(0,0,0,0.07)" />
            <text x={X(t)} y={H - m.b + 16} text-anchor="middle" class="tick">
              {label}
            </text>
          </g>
        ))}
        {withLabels(niceTicks(0, yMax)).map(([t, label]) => (
          <g key={`y${t}`}>
            <line x1={m.l} x2={W - m.r} y1={Y(t)} y2={Y(t)} stroke="rgba(0,0,0,0.07)" />
            <text x={m.l - 6} y={Y(t) + 4} text-anchor="end" class="tick">
              {label}
            </text>
          </g>
        ))}
        <text x={(m.l + W - m.r) / 2} y={H - 6} text-anchor="middle" class="axis-label">
          {p.xLabel}
        </text>
        <text transform={`translate(12 ${(m.t + H - m.b) / 2}) rotate(-90)`} text-anchor="middle" class="axis-label">
          {p.yLabel}
        </text>
        {p.xLimit && (
          <g>
            <line x1={X(p.xLimit.value)} x2={X(p.xLimit.value)} y1={m.t} y2={H - m.b} stroke={STYLE.limit.stroke} stroke-dasharray="8 4" stroke-width="1.5" />
            <text x={X(p.xLimit.value) + 4} y={m.t + 12} class="limit-label" fill={STYLE.limit.stroke}>
              {p.xLimit.label}
            </text>
          </g>
        )}
        {p.yLimit && (
          <g>
            <line x1={m.l} x2={W - m.r} y1={Y(p.yLimit.value)} y2={Y(p.yLimit.value)} stroke={STYLE.limit.stroke} stroke-dasharray="8 4" stroke-width="1.5" />
            <text x={W - m.r - 4} y={Y(p.yLimit.value) - 4} text-anchor="end" class="limit-label" fill={STYLE.limit.stroke}>
              {p.yLimit.label}
            </text>
          </g>
        )}
        {p.points.map((q) => {
          const cx = X(q.x);
          const cy = Y(q.y);
          const click = p.onToggle ? () => p.onToggle!(q.key) : undefined;
          const common = { onClick: click, class: p.onToggle ? 'pt clickable' : 'pt', 'data-key': q.key };
          if (q.excluded)
            return (
              <g key={q.key} {...common}>
                <title>{q.title} (excluded)</title>
                <path d={`M${cx - 4} ${cy - 4}L${cx + 4} ${cy + 4}M${cx + 4} ${cy - 4}L${cx - 4} ${cy + 4}`} stroke={STYLE.excluded.stroke} stroke-width="2" />
                <circle cx={cx} cy={cy} r="6" fill="transparent" />
              </g>
            );
          if (outside(q))
            return (
              <g key={q.key} {...common}>
                <title>{q.title}</title>
                <polygon points={`${cx},${cy - 5} ${cx + 5},${cy + 4} ${cx - 5},${cy + 4}`} fill={STYLE.outside.stroke} />
              </g>
            );
          return (
            <g key={q.key} {...common}>
              <title>{q.title}</title>
              <circle cx={cx} cy={cy} r="3" fill="rgba(0,114,178,0.55)" stroke={STYLE.batch.stroke} stroke-width="0.5" />
            </g>
          );
        })}
      </svg>
    </figure>
  );
}
