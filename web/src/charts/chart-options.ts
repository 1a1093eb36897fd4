/** uPlot option builders for each chart kind. Axes always carry units; limits carry their confidence. */
import uPlot from 'uplot';
import type { Band } from './envelope-band.ts';
import { yRange } from './envelope-band.ts';
import type { LimitLine } from './plugins.ts';
import { envelopePlugin, limitLinesPlugin, outsideMarkersPlugin, regionsPlugin, verticalMarkersPlugin } from './plugins.ts';
import type { SeriesStyle } from '../theme/palette.ts';
import { REGION_FILLS, STYLE } from '../theme/palette.ts';
import { superscript } from '../format/number-format.ts';

const AXIS_FONT = '12px system-ui, sans-serif';
const LABEL_FONT = '600 12px system-ui, sans-serif';
const GRID = { stroke: 'rgba(0,0,0,0.08)', width: 1 };
const TICKS = { stroke: 'rgba(0,0,0,0.25)', width: 1, size: 5 };

function axis(label: string, extra: Partial<uPlot.Axis> = {}): uPlot.Axis {
  return { label, font: AXIS_FONT, labelFont: LABEL_FONT, stroke: '#333', grid: GRID, ticks: TICKS, labelSize: 20, ...extra };
}

/** Tick labels: plain numbers, or "7.5×10⁻⁴" style when the ticks are very small or large. */
export function tickLabels(splits: number[]): string[] {
  const finite = splits.filter((v) => v !== null && Number.isFinite(v) && v !== 0);
  const maxAbs = finite.length ? Math.max(...finite.map(Math.abs)) : 1;
  const even = splits.length < 3 || Math.abs(splits[2] - splits[1] - (splits[1] - splits[0])) <= 1e-9 * maxAbs;
  if (!even) {
    // Log axes: each label on its own, three significant digits at most.
    return splits.map((v) => {
      if (v === null) return '';
      const a = Math.abs(v);
      if (a >= 1e-2 && a < 1e5) return String(Number(v.toPrecision(3))).replace('-', '−');
      const e = Math.floor(Math.log10(a));
      const m = Number((v / 10 ** e).toPrecision(2));
      return m === 1 ? `10${superscript(e)}` : `${String(m).replace('-', '−')}×10${superscript(e)}`;
    });
  }
  if (maxAbs >= 1e-2 && maxAbs < 1e5) {
    // As few decimals as the step between ticks needs.
    const step = splits.length > 1 ? Math.abs(splits[1] - splits[0]) : maxAbs;
    let dec = 0;
    while (dec < 6 && step > 0 && Math.abs(step * 10 ** dec - Math.round(step * 10 ** dec)) > 1e-6 * step * 10 ** dec) dec++;
    return splits.map((v) => (v === null ? '' : v === 0 ? '0' : fixedTick(v, dec)));
  }
  return splits.map((v) => {
    if (v === null) return '';
    if (v === 0) return '0';
    const e = Math.floor(Math.log10(Math.abs(v)));
    const m = Number((v / 10 ** e).toPrecision(2));
    return `${String(m).replace('-', '−')}×10${superscript(e)}`;
  });
}

/**
 * Tick labels of a log axis, whatever splits uPlot gives (it may give 1, 2, 3, … 9 within each
 * decade, which look evenly spaced at the start and must not be read as a linear axis): decades
 * are labelled ("10⁻⁴", "0.01", "1", "100"), and 2 and 5 within them where the axis spans two
 * decades or less; the other ticks stay unlabelled so labels never crowd.
 */
export function logTickLabels(splits: number[]): string[] {
  const pos = splits.filter((v) => v !== null && Number.isFinite(v) && v > 0);
  if (pos.length === 0) return splits.map(() => '');
  const decades = Math.log10(Math.max(...pos) / Math.min(...pos));
  return splits.map((v) => {
    if (v === null || !Number.isFinite(v) || v <= 0) return '';
    const e = Math.floor(Math.log10(v) + 1e-9);
    const m = Math.round((v / 10 ** e) * 100) / 100;
    if (m !== 1 && !(decades <= 2 && (m === 2 || m === 5))) return '';
    if (v >= 1e-2 && v < 1e5) return String(Number(v.toPrecision(2)));
    return m === 1 ? `10${superscript(e)}` : `${m}×10${superscript(e)}`;
  });
}

const logValues = (_u: uPlot, splits: number[]) => logTickLabels(splits);

function fixedTick(v: number, dec: number): string {
  return v.toFixed(dec).replace('-', '−');
}

const yValues = (_u: uPlot, splits: number[]) => tickLabels(splits);

/** Axis width from its longest label, so labels never run into the axis title. */
const ySize = (u: uPlot, values: string[] | null) => {
  if (!values || values.length === 0) return 50;
  const longest = Math.max(...values.map((v) => (v ?? '').length));
  return Math.max(44, Math.ceil(longest * 7.2) + 24);
};

export function line(style: SeriesStyle, label = style.label, extra: Partial<uPlot.Series> = {}): uPlot.Series {
  return { label, stroke: style.stroke, width: style.width, dash: style.dash.length ? style.dash : undefined, points: { show: false }, spanGaps: false, ...extra };
}

export interface Marks {
  x: number;
  label: string;
  style: SeriesStyle;
}

interface Base {
  width: number;
  height: number;
  xLabel: string;
  yLabel: string;
  getMarks?: () => Marks[];
}

function base(b: Base, series: uPlot.Series[], plugins: uPlot.Plugin[], scales: uPlot.Scales, yExtra: Partial<uPlot.Axis> = {}): uPlot.Options {
  if (b.getMarks) plugins.push(verticalMarkersPlugin(b.getMarks));
  return {
    width: b.width,
    height: b.height,
    legend: { show: false },
    cursor: { drag: { x: true, y: false, setScale: true }, points: { size: 7 } },
    scales,
    series,
    axes: [axis(b.xLabel, { values: yValues }), axis(b.yLabel, { values: yValues, size: ySize, ...yExtra })],
    plugins,
  };
}

/** Score of one PC against batch progress, over the golden envelope band. */
export function scoreChartOptions(
  b: Base & {
    pc: number;
    getBand: () => Band | null;
    getScores: () => ArrayLike<number>;
    /** Per-point envelope status as the monitor judged it (1 above, −1 below); else the band decides. */
    getStatus?: () => ArrayLike<number> | null;
  },
): uPlot.Options {
  return base(
    b,
    [{ label: b.xLabel }, line(STYLE.batch, `PC${b.pc} score`)],
    [envelopePlugin(b.getBand), outsideMarkersPlugin(1, () => ({ status: b.getStatus?.() ?? null, band: b.getBand() }))],
    {
      // The x axis spans the whole golden course (and the batch, if longer): the operator sees
      // where the batch is within it, and the envelope layer is not redrawn every frame.
      x: { time: false, range: (_u, min, max) => courseRange(b.getBand(), min, max) },
      y: { range: () => yRange(b.getBand(), [b.getScores()]) },
    },
  );
}

/** x range covering the band's progress span and the data's. */
export function courseRange(band: Band | null, min: number | null, max: number | null): [number, number] {
  let lo = Number.isFinite(min) ? (min as number) : Infinity;
  let hi = Number.isFinite(max) ? (max as number) : -Infinity;
  if (band && band.x.length) {
    lo = Math.min(lo, band.x[0]);
    hi = Math.max(hi, band.x[band.x.length - 1]);
  }
  if (!Number.isFinite(lo) || !Number.isFinite(hi)) return [0, 1];
  if (lo === hi) return [lo - 1, hi + 1];
  return [lo, hi];
}

/**
 * T² or Q against progress with the overall limit drawn and named, the local (per-progress) limit
 * as a dashed series when present, the alarm (action) limit as a dash-dot series when the model has
 * one above the drawn limits, points above the limit marked ▲, optional log scale.
 */
export function statChartOptions(
  b: Base & {
    stat: 'T²' | 'Q';
    log: boolean;
    getLines: () => LimitLine[];
    /** Limit at data index i (local limit if present, else the overall one). */
    limitAt: (i: number) => number;
    hasLocal: boolean;
    hasAlarm?: boolean;
    getValues: () => ArrayLike<number>;
    /** The golden course in minutes, so T² and Q line up with the score charts; null = data only. */
    getCourse?: () => [number, number] | null;
  },
): uPlot.Options {
  const series: uPlot.Series[] = [{ label: b.xLabel }, line(STYLE.batch, b.stat, { points: { show: false } })];
  if (b.hasLocal) series.push(line(STYLE.warnLimit, `${b.stat} local limit`));
  if (b.hasAlarm) series.push(line(STYLE.alarmLimit, `${b.stat} alarm limit`));
  return base(b, series, [limitLinesPlugin(b.getLines), outsideMarkersPlugin(1, () => ({ limit: b.limitAt }))], {
    x: {
      time: false,
      range: (_u, min, max) => {
        const c = b.getCourse?.() ?? null;
        return courseRange(c ? { x: c, mean: [], lower: [], upper: [] } : null, min, max);
      },
    },
    y: b.log
      ? { distr: 3, log: 10, range: (_u, min, max) => logRange(min, max, b.getLines()) }
      : { range: (_u, _min, max) => [0, Math.max(max, ...b.getLines().map((l) => l.value).filter(Number.isFinite)) * 1.1 || 1] },
  }, b.log ? { values: logValues } : {});
}

/** Range for a log axis covering data and limits, at least one decade. */
export function logRange(min: number, max: number, lines: LimitLine[]): [number, number] {
  const vals = [min, max, ...lines.map((l) => l.value)].filter((v) => Number.isFinite(v) && v > 0);
  if (vals.length === 0) return [0.01, 10];
  let lo = Math.min(...vals);
  let hi = Math.max(...vals);
  lo = 10 ** Math.floor(Math.log10(lo));
  hi = 10 ** Math.ceil(Math.log10(hi * 1.05));
  if (hi / lo < 10) hi = lo * 10;
  return [lo, hi];
}

/** The score plane PC a against PC b: golden path (and references), the batch's path, start ● and latest ◆. */
export function planeOptions(b: { width: number; height: number; pcA: number; pcB: number; nRefs: number }): uPlot.Options {
  const series: uPlot.Series[] = [{}];
  for (let i = 0; i < b.nRefs; i++) series.push({ label: `reference ${i + 1}`, stroke: STYLE.reference.stroke, width: 1, dash: STYLE.reference.dash, points: { show: false }, facets: facets() } as uPlot.Series);
  series.push({ label: 'golden path', stroke: STYLE.goldenMean.stroke, width: 2, dash: STYLE.goldenMean.dash, points: { show: false }, facets: facets() } as uPlot.Series);
  series.push({ label: 'this batch', stroke: STYLE.batch.stroke, width: STYLE.batch.width, points: { show: false }, facets: facets() } as uPlot.Series);
  return {
    mode: 2,
    width: b.width,
    height: b.height,
    legend: { show: false },
    cursor: { drag: { x: false, y: false } },
    scales: { x: { time: false, auto: true }, y: { auto: true } },
    series,
    axes: [axis(`PC${b.pcA} score`, { values: yValues }), axis(`PC${b.pcB} score`, { values: yValues, size: ySize })],
    plugins: [planeEndsPlugin(series.length - 1)],
  };
}

function facets(): uPlot.Series.Facet[] {
  return [
    { scale: 'x', auto: true },
    { scale: 'y', auto: true },
  ];
}

/** Start (circle) and latest point (diamond) of the batch path in the score plane. */
function planeEndsPlugin(batchIdx: number): uPlot.Plugin {
  return {
    hooks: {
      draw: (u) => {
        const d = u.data[batchIdx] as unknown as [ArrayLike<number>, ArrayLike<number>] | undefined;
        if (!d || !d[0] || d[0].length === 0) return;
        const ctx = u.ctx;
        const n = d[0].length;
        const P = (i: number) => [u.valToPos(d[0][i], 'x', true), u.valToPos(d[1][i], 'y', true)] as const;
        ctx.save();
        const r = 5 * uPlot.pxRatio;
        const [sx, sy] = P(0);
        ctx.beginPath();
        ctx.arc(sx, sy, r, 0, Math.PI * 2);
        ctx.fillStyle = '#fff';
        ctx.fill();
        ctx.strokeStyle = STYLE.batch.stroke;
        ctx.lineWidth = 2 * uPlot.pxRatio;
        ctx.stroke();
        const [ex, ey] = P(n - 1);
        ctx.beginPath();
        ctx.moveTo(ex, ey - r * 1.4);
        ctx.lineTo(ex + r * 1.4, ey);
        ctx.lineTo(ex, ey + r * 1.4);
        ctx.lineTo(ex - r * 1.4, ey);
        ctx.closePath();
        ctx.fillStyle = STYLE.selected.stroke;
        ctx.fill();
        ctx.strokeStyle = '#fff';
        ctx.stroke();
        ctx.restore();
      },
    },
  };
}

/** A spectrum (or several) against wavelength, with an optional band (e.g. golden mean ± k·sd). */
export function spectrumOptions(
  b: Base & { series: { style: SeriesStyle; label: string }[]; getBand?: () => Band | null },
): uPlot.Options {
  const plugins: uPlot.Plugin[] = [];
  if (b.getBand) plugins.push(envelopePlugin(b.getBand));
  // With a band, the y range holds band and spectrum together (the band may reach beyond the spectrum).
  const y: uPlot.Scale = b.getBand ? { range: (u) => yRange(b.getBand!(), u.data.slice(1) as ArrayLike<number>[]) } : { auto: true };
  return base(b, [{ label: 'wavelength' }, ...b.series.map((s) => line(s.style, s.label))], plugins, { x: { time: false }, y });
}

/** Contributions by wavelength as bars, with band-assignment regions shaded and named. */
export function contributionOptions(
  b: Base & { label: string; getRegions: () => { from: number; to: number; name: string }[] },
): uPlot.Options {
  const bars = uPlot.paths.bars!({ size: [0.9, 8] });
  return base(
    b,
    [{ label: 'wavelength' }, { label: b.label, stroke: STYLE.batch.stroke, fill: 'rgba(0,114,178,0.55)', width: 1, paths: bars, points: { show: false } }],
    // only regions with an assigned band are shaded and named; wavelengths between them stay plain
    [regionsPlugin(() => b.getRegions().filter((r) => !r.name.startsWith('other')), REGION_FILLS)],
    { x: { time: false }, y: { auto: true } },
  );
}

/** Plain line chart (explained variance, CV curve, loadings), optional points. */
export function linesOptions(b: Base & { series: { style: SeriesStyle; label: string; points?: boolean }[]; getLines?: () => LimitLine[]; yLog?: boolean; integerX?: boolean }): uPlot.Options {
  const plugins: uPlot.Plugin[] = [];
  if (b.getLines) plugins.push(limitLinesPlugin(b.getLines));
  const o = base(
    b,
    [{ label: b.xLabel }, ...b.series.map((s) => line(s.style, s.label, s.points ? { points: { show: true, size: 7, fill: s.style.stroke } } : {}))],
    plugins,
    { x: { time: false }, y: b.yLog ? { distr: 3, log: 10 } : { auto: true } },
    b.yLog ? { values: logValues } : {},
  );
  // Component counts are whole numbers: ticks at 1, 2, 5, … steps only.
  if (b.integerX) o.axes![0] = { ...o.axes![0], incrs: [1, 2, 5, 10, 20, 50] };
  return o;
}
