/** A uPlot chart in a preact component. Options are built once per `optsKey`; data may be swapped cheaply. */
import { useEffect, useRef } from 'preact/hooks';
import uPlot from 'uplot';
import type { SeriesStyle } from '../theme/palette.ts';

export interface ChartProps {
  /** Build options for a given width. Called again when `optsKey` changes. */
  make: (width: number, height: number) => uPlot.Options;
  optsKey: string;
  data: uPlot.AlignedData;
  height: number;
  /** Accessible description of what the chart shows. */
  title: string;
  /** Receives the uPlot instance (for live updates by the caller); null on teardown. */
  onReady?: (u: uPlot | null) => void;
  /** Click on the plot area: the index of the nearest data point (mode 1 charts). */
  onPick?: (idx: number) => void;
  legend?: { style: SeriesStyle; label?: string }[];
  testId?: string;
}

/** Charts grow on a large control-room screen (≥ 2200 px wide): heights × 1.4. */
export function chartHeight(h: number): number {
  return typeof window !== 'undefined' && window.innerWidth >= 2200 ? Math.round(h * 1.4) : h;
}

/**
 * setData only when the data has one array per series of the instance. A live update can arrive
 * between the render that changed a chart's series (a model with alarm limits, a new batch) and the
 * effect that rebuilds the chart for them; uPlot would then read a missing array and throw. The
 * rebuild follows with the new data, so skipping that one update loses nothing.
 */
export function setDataIfShaped(u: uPlot | null, data: uPlot.AlignedData): void {
  if (u && data.length === u.series.length) u.setData(data);
}

export function Chart(p: ChartProps) {
  const box = useRef<HTMLDivElement>(null);
  const plot = useRef<uPlot | null>(null);
  const pick = useRef(p.onPick);
  pick.current = p.onPick;

  useEffect(() => {
    const el = box.current!;
    const width = Math.max(200, el.clientWidth);
    const height = chartHeight(p.height);
    const opts = p.make(width, height);
    const u = new uPlot(opts, p.data, el);
    plot.current = u;
    p.onReady?.(u);
    const onClick = () => {
      const idx = u.cursor.idx;
      if (idx !== null && idx !== undefined && pick.current) pick.current(idx);
    };
    u.over.addEventListener('click', onClick);
    const ro = new ResizeObserver(() => {
      const w = Math.max(200, el.clientWidth);
      if (Math.abs(w - u.width) > 2) u.setSize({ width: w, height });
    });
    ro.observe(el);
    return () => {
      ro.disconnect();
      u.over.removeEventListener('click', onClick);
      p.onReady?.(null);
      u.destroy();
      plot.current = null;
    };
    // eslint-disable-next-line react-hooks/exhaustive-deps
  }, [p.optsKey, p.height]);

  useEffect(() => {
    setDataIfShaped(plot.current, p.data);
  }, [p.data]);

  return (
    <figure class="chart" data-testid={p.testId}>
      {p.legend && p.legend.length > 0 && <Legend items={p.legend} />}
      <div ref={box} role="img" aria-label={p.title} class={p.onPick ? 'chart-box pickable' : 'chart-box'} />
    </figure>
  );
}

export function Swatch({ style }: { style: SeriesStyle }) {
  const dash = style.dash.join(' ');
  return (
    <svg width="34" height="14" aria-hidden="true" class="swatch">
      {style.fill && <rect x="1" y="2" width="32" height="10" fill={style.fill} stroke={style.stroke} stroke-width="1" />}
      {!style.fill && <line x1="1" y1="7" x2="33" y2="7" stroke={style.stroke} stroke-width={Math.max(1.5, style.width)} stroke-dasharray={dash || undefined} />}
      {style.marker !== 'none' && <MarkerSvg shape={style.marker} colour={style.stroke} />}
    </svg>
  );
}

function MarkerSvg({ shape, colour }: { shape: SeriesStyle['marker']; colour: string }) {
  const c = 17;
  switch (shape) {
    case 'triangle-up':
      return <polygon points={`${c},2 ${c + 5},12 ${c - 5},12`} fill={colour} />;
    case 'triangle-down':
      return <polygon points={`${c},12 ${c + 5},2 ${c - 5},2`} fill={colour} />;
    case 'diamond':
      return <polygon points={`${c},1 ${c + 6},7 ${c},13 ${c - 6},7`} fill={colour} />;
    case 'square':
      return <rect x={c - 4} y="3" width="8" height="8" fill={colour} />;
    case 'cross':
      return <path d={`M${c - 4} 3 L${c + 4} 11 M${c + 4} 3 L${c - 4} 11`} stroke={colour} stroke-width="2" />;
    case 'circle':
      return <circle cx={c} cy="7" r="4" fill={colour} />;
    default:
      return null;
  }
}

export function Legend({ items }: { items: { style: SeriesStyle; label?: string }[] }) {
  return (
    <figcaption class="legend">
      {items.map((it) => (
        <span class="legend-item" key={it.label ?? it.style.label}>
          <Swatch style={it.style} />
          {it.label ?? it.style.label}
        </span>
      ))}
    </figcaption>
  );
}
