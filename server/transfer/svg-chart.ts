/**
 * Static SVG charts for printable reports (no script: a PDF printer and an archive reader see the same
 * picture). Lines, filled bands and named horizontal limit lines, labelled axes with units, an
 * optional log scale. Colours from the Okabe–Ito palette (Okabe & Ito 2008, "Color Universal Design"),
 * always paired with a dash pattern or marker and a legend label, never colour alone.
 */

export const OKABE_ITO = {
  black: '#000000',
  orange: '#E69F00',
  skyBlue: '#56B4E9',
  green: '#009E73',
  yellow: '#F0E442',
  blue: '#0072B2',
  vermillion: '#D55E00',
  purple: '#CC79A7',
} as const;

export interface ChartSeries {
  name: string;
  x: ArrayLike<number>;
  y: ArrayLike<number | null>;
  color: string;
  dash?: string;
  width?: number;
  /** Draw points as small markers instead of a line. */
  markers?: 'circle' | 'square' | 'triangle';
}
export interface ChartBand {
  name: string;
  x: ArrayLike<number>;
  lower: ArrayLike<number>;
  upper: ArrayLike<number>;
  color: string;
}
export interface ChartLimit {
  name: string;
  y: number;
  color: string;
  dash?: string;
}
export interface ChartRegion {
  name: string;
  from: number;
  to: number;
}
export interface LineChartSpec {
  title: string;
  xLabel: string;
  yLabel: string;
  width?: number;
  height?: number;
  series?: ChartSeries[];
  bands?: ChartBand[];
  limits?: ChartLimit[];
  /** Shaded x-regions with labels (e.g. band assignments on a wavelength axis). */
  regions?: ChartRegion[];
  /** Vertical markers (e.g. first exit, endpoint). */
  markersX?: { name: string; x: number; color: string }[];
  logY?: boolean;
}

export function escapeXml(s: string): string {
  return s.replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c]!);
}

/** "Nice" tick values covering [lo, hi] (Heckbert 1990, "Nice numbers for graph labels", Graphics Gems). */
export function niceTicks(lo: number, hi: number, count = 5): number[] {
  if (!Number.isFinite(lo) || !Number.isFinite(hi)) return [];
  if (hi === lo) {
    hi = lo + 1;
    lo = lo - 1;
  }
  const nice = (x: number, round: boolean) => {
    const e = Math.floor(Math.log10(x));
    const f = x / 10 ** e;
    const nf = round ? (f < 1.5 ? 1 : f < 3 ? 2 : f < 7 ? 5 : 10) : f <= 1 ? 1 : f <= 2 ? 2 : f <= 5 ? 5 : 10;
    return nf * 10 ** e;
  };
  const range = nice(hi - lo, false);
  const step = nice(range / Math.max(1, count - 1), true);
  const start = Math.floor(lo / step) * step;
  const ticks: number[] = [];
  for (let v = start; v <= hi + step * 0.5; v += step) if (v >= lo - step * 1e-9) ticks.push(Number(v.toPrecision(12)));
  return ticks;
}

const SUPERSCRIPT: Record<string, string> = { '-': '⁻', '0': '⁰', '1': '¹', '2': '²', '3': '³', '4': '⁴', '5': '⁵', '6': '⁶', '7': '⁷', '8': '⁸', '9': '⁹' };

/** A tick label: plain below 10⁵ and from 10⁻³, else "5 × 10⁻⁴" (not "5.0e-4", which reads as a code). */
export function formatTick(v: number): string {
  if (v === 0) return '0';
  const a = Math.abs(v);
  if (a >= 1e5 || a < 1e-3) {
    const [mant, exp] = v.toExponential(1).split('e');
    const m = Number(mant).toString();
    const e = String(Number(exp)).replace(/[-0-9]/g, (c) => SUPERSCRIPT[c]!);
    return m === '1' ? `10${e}` : m === '-1' ? `−10${e}` : `${m.replace('-', '−')} × 10${e}`;
  }
  return Number(v.toPrecision(4)).toString();
}

const FONT = 'font-family="DejaVu Sans, Arial, sans-serif"';

/** Render a line chart as a standalone SVG element. */
export function lineChart(spec: LineChartSpec): string {
  const W = spec.width ?? 720;
  const H = spec.height ?? 300;
  const m = { l: 70, r: 16, t: 28, b: 64 };
  const pw = W - m.l - m.r;
  const ph = H - m.t - m.b;
  const xs: number[] = [];
  const ys: number[] = [];
  const push = (arr: number[], v: number | null | undefined) => {
    if (v !== null && v !== undefined && Number.isFinite(v) && (!spec.logY || arr !== ys || v > 0)) arr.push(v);
  };
  for (const s of spec.series ?? []) for (let i = 0; i < s.x.length; i++) if (s.y[i] !== null) (push(xs, s.x[i]), push(ys, s.y[i]));
  for (const b of spec.bands ?? []) for (let i = 0; i < b.x.length; i++) (push(xs, b.x[i]), push(ys, b.lower[i]), push(ys, b.upper[i]));
  for (const l of spec.limits ?? []) push(ys, l.y);
  for (const r of spec.regions ?? []) (push(xs, r.from), push(xs, r.to));
  const empty = xs.length === 0 || ys.length === 0;
  let x0 = empty ? 0 : Math.min(...xs);
  let x1 = empty ? 1 : Math.max(...xs);
  if (x0 === x1) (x0 -= 1), (x1 += 1);
  const tf = (v: number) => (spec.logY ? Math.log10(Math.max(v, 1e-300)) : v);
  let y0 = empty ? 0 : tf(Math.min(...ys));
  let y1 = empty ? 1 : tf(Math.max(...ys));
  if (y0 === y1) (y0 -= 1), (y1 += 1);
  const pad = (y1 - y0) * 0.05;
  y0 -= pad;
  y1 += pad;
  const X = (v: number) => m.l + ((v - x0) / (x1 - x0)) * pw;
  const Y = (v: number) => m.t + ph - ((tf(v) - y0) / (y1 - y0)) * ph;
  const out: string[] = [];
  out.push(`<svg xmlns="http://www.w3.org/2000/svg" width="${W}" height="${H}" viewBox="0 0 ${W} ${H}" role="img" aria-label="${escapeXml(spec.title)}">`);
  out.push(`<text x="${m.l}" y="18" ${FONT} font-size="13" font-weight="bold">${escapeXml(spec.title)}</text>`);
  out.push(`<rect x="${m.l}" y="${m.t}" width="${pw}" height="${ph}" fill="#fff" stroke="#444" stroke-width="1"/>`);
  if (empty) {
    out.push(`<text x="${m.l + pw / 2}" y="${m.t + ph / 2}" text-anchor="middle" ${FONT} font-size="12" fill="#555">no data</text></svg>`);
    return out.join('');
  }
  // regions
  (spec.regions ?? []).forEach((r, i) => {
    const a = X(Math.max(r.from, x0));
    const b = X(Math.min(r.to, x1));
    if (b <= a) return;
    out.push(`<rect x="${a.toFixed(1)}" y="${m.t}" width="${(b - a).toFixed(1)}" height="${ph}" fill="${i % 2 ? '#eeeeee' : '#e4e4e4'}"/>`);
    out.push(`<text x="${((a + b) / 2).toFixed(1)}" y="${m.t + 12}" text-anchor="middle" ${FONT} font-size="9" fill="#333">${escapeXml(r.name)}</text>`);
  });
  // grid + ticks
  const xt = niceTicks(x0, x1, 7).filter((v) => v >= x0 && v <= x1);
  const yt = spec.logY ? logTicks(y0, y1) : niceTicks(y0, y1, 5).filter((v) => v >= y0 && v <= y1);
  for (const v of xt) {
    out.push(`<line x1="${X(v).toFixed(1)}" x2="${X(v).toFixed(1)}" y1="${m.t}" y2="${m.t + ph}" stroke="#ddd"/>`);
    out.push(`<text x="${X(v).toFixed(1)}" y="${m.t + ph + 14}" text-anchor="middle" ${FONT} font-size="10">${formatTick(v)}</text>`);
  }
  for (const v of yt) {
    out.push(`<line x1="${m.l}" x2="${m.l + pw}" y1="${Y(v).toFixed(1)}" y2="${Y(v).toFixed(1)}" stroke="#ddd"/>`);
    out.push(`<text x="${m.l - 4}" y="${(Y(v) + 3).toFixed(1)}" text-anchor="end" ${FONT} font-size="10">${formatTick(v)}</text>`);
  }
  out.push(`<text x="${m.l + pw / 2}" y="${m.t + ph + 30}" text-anchor="middle" ${FONT} font-size="11">${escapeXml(spec.xLabel)}</text>`);
  out.push(`<text transform="translate(14 ${m.t + ph / 2}) rotate(-90)" text-anchor="middle" ${FONT} font-size="11">${escapeXml(spec.yLabel + (spec.logY ? ' (log scale)' : ''))}</text>`);
  const clip = `clip-${Math.abs(hashString(spec.title))}`;
  out.push(`<clipPath id="${clip}"><rect x="${m.l}" y="${m.t}" width="${pw}" height="${ph}"/></clipPath><g clip-path="url(#${clip})">`);
  for (const b of spec.bands ?? []) {
    const up: string[] = [];
    const lo: string[] = [];
    for (let i = 0; i < b.x.length; i++) {
      up.push(`${X(b.x[i]!).toFixed(1)},${Y(b.upper[i]!).toFixed(1)}`);
      lo.push(`${X(b.x[i]!).toFixed(1)},${Y(b.lower[i]!).toFixed(1)}`);
    }
    out.push(`<polygon points="${[...up, ...lo.reverse()].join(' ')}" fill="${b.color}" fill-opacity="0.25" stroke="${b.color}" stroke-width="0.8" stroke-dasharray="2 2"/>`);
  }
  for (const l of spec.limits ?? []) {
    out.push(`<line x1="${m.l}" x2="${m.l + pw}" y1="${Y(l.y).toFixed(1)}" y2="${Y(l.y).toFixed(1)}" stroke="${l.color}" stroke-width="1.5" stroke-dasharray="${l.dash ?? '6 3'}"/>`);
    out.push(`<text x="${m.l + pw - 4}" y="${(Y(l.y) - 3).toFixed(1)}" text-anchor="end" ${FONT} font-size="10" fill="${l.color}">${escapeXml(l.name)}</text>`);
  }
  for (const s of spec.series ?? []) {
    if (s.markers) {
      for (let i = 0; i < s.x.length; i++) {
        const yv = s.y[i];
        if (yv === null || yv === undefined || !Number.isFinite(yv)) continue;
        const cx = X(s.x[i]!).toFixed(1);
        const cy = Y(yv).toFixed(1);
        out.push(
          s.markers === 'square'
            ? `<rect x="${+cx - 2}" y="${+cy - 2}" width="4" height="4" fill="${s.color}"/>`
            : s.markers === 'triangle'
              ? `<path d="M${cx} ${+cy - 3}l3 5h-6z" fill="${s.color}"/>`
              : `<circle cx="${cx}" cy="${cy}" r="2" fill="${s.color}"/>`,
        );
      }
      continue;
    }
    let d = '';
    let pen = false;
    for (let i = 0; i < s.x.length; i++) {
      const yv = s.y[i];
      if (yv === null || yv === undefined || !Number.isFinite(yv) || (spec.logY && yv <= 0)) {
        pen = false;
        continue;
      }
      d += `${pen ? 'L' : 'M'}${X(s.x[i]!).toFixed(1)} ${Y(yv).toFixed(1)}`;
      pen = true;
    }
    out.push(`<path d="${d}" fill="none" stroke="${s.color}" stroke-width="${s.width ?? 1.5}"${s.dash ? ` stroke-dasharray="${s.dash}"` : ''}/>`);
  }
  for (const mk of spec.markersX ?? []) {
    if (mk.x < x0 || mk.x > x1) continue;
    out.push(`<line x1="${X(mk.x).toFixed(1)}" x2="${X(mk.x).toFixed(1)}" y1="${m.t}" y2="${m.t + ph}" stroke="${mk.color}" stroke-width="1.5" stroke-dasharray="1 3"/>`);
    out.push(`<text x="${(X(mk.x) + 3).toFixed(1)}" y="${m.t + 24}" ${FONT} font-size="10" fill="${mk.color}">${escapeXml(mk.name)}</text>`);
  }
  out.push('</g>');
  // legend (text + line sample: never colour alone)
  const items = [
    ...(spec.bands ?? []).map((b) => ({ name: b.name, color: b.color, kind: 'band' as const, dash: '' })),
    ...(spec.series ?? []).map((s) => ({ name: s.name, color: s.color, kind: s.markers ? ('marker' as const) : ('line' as const), dash: s.dash ?? '' })),
    ...(spec.limits ?? []).map((l) => ({ name: l.name, color: l.color, kind: 'line' as const, dash: l.dash ?? '6 3' })),
  ];
  let lx = m.l;
  const ly = H - 12;
  for (const it of items) {
    if (it.kind === 'band') out.push(`<rect x="${lx}" y="${ly - 7}" width="18" height="8" fill="${it.color}" fill-opacity="0.25" stroke="${it.color}" stroke-dasharray="2 2"/>`);
    else if (it.kind === 'marker') out.push(`<circle cx="${lx + 9}" cy="${ly - 3}" r="2.5" fill="${it.color}"/>`);
    else out.push(`<line x1="${lx}" x2="${lx + 18}" y1="${ly - 3}" y2="${ly - 3}" stroke="${it.color}" stroke-width="2"${it.dash ? ` stroke-dasharray="${it.dash}"` : ''}/>`);
    out.push(`<text x="${lx + 22}" y="${ly}" ${FONT} font-size="10">${escapeXml(it.name)}</text>`);
    lx += 30 + it.name.length * 6;
  }
  out.push('</svg>');
  return out.join('');
}

/** Ticks for a log axis spanning 10^a…10^b: decades, plus 2× and 5× when fewer than three decades show. */
function logTicks(a: number, b: number): number[] {
  const out: number[] = [];
  const mult = b - a < 3 ? [1, 2, 5] : [1];
  for (let e = Math.floor(a); e <= Math.ceil(b); e++) for (const k of mult) {
    const v = k * 10 ** e;
    const lv = Math.log10(v);
    if (lv >= a && lv <= b) out.push(Number(v.toPrecision(6)));
  }
  return out;
}

function hashString(s: string): number {
  let h = 0;
  for (let i = 0; i < s.length; i++) h = (h * 31 + s.charCodeAt(i)) | 0;
  return h;
}

export interface BarChartSpec {
  title: string;
  /** Axis label of the values, with unit. */
  valueLabel: string;
  rows: { label: string; values: number[] }[];
  /** One per entry of values: name, colour and fill pattern (never colour alone). */
  series: { name: string; color: string; pattern: 'solid' | 'hatched' }[];
  width?: number;
  /** Value axis maximum (default: the largest value). */
  max?: number;
  format?: (v: number) => string;
}

/** Horizontal grouped bars, one group per row, with the value printed at each bar's end. */
export function barChart(spec: BarChartSpec): string {
  const W = spec.width ?? 720;
  const labelW = 260;
  const barH = 11;
  const groupH = spec.series.length * (barH + 2) + 10;
  const top = 28;
  const H = top + spec.rows.length * groupH + 52;
  const pw = W - labelW - 70;
  const max = spec.max ?? Math.max(1e-12, ...spec.rows.flatMap((r) => r.values.filter(Number.isFinite)));
  const fmt = spec.format ?? formatTick;
  const out: string[] = [`<svg xmlns="http://www.w3.org/2000/svg" width="${W}" height="${H}" viewBox="0 0 ${W} ${H}" role="img" aria-label="${escapeXml(spec.title)}">`];
  out.push(`<defs>${spec.series.map((s, i) => `<pattern id="hatch-${i}" width="5" height="5" patternUnits="userSpaceOnUse" patternTransform="rotate(45)"><rect width="5" height="5" fill="#fff"/><line x1="0" y1="0" x2="0" y2="5" stroke="${s.color}" stroke-width="3"/></pattern>`).join('')}</defs>`);
  out.push(`<text x="4" y="18" ${FONT} font-size="13" font-weight="bold">${escapeXml(spec.title)}</text>`);
  spec.rows.forEach((r, gi) => {
    const y0 = top + gi * groupH;
    out.push(`<text x="${labelW - 6}" y="${y0 + groupH / 2}" text-anchor="end" ${FONT} font-size="10">${escapeXml(r.label)}</text>`);
    r.values.forEach((v, si) => {
      const s = spec.series[si]!;
      const w = Number.isFinite(v) ? Math.max(0, (v / max) * pw) : 0;
      const y = y0 + 4 + si * (barH + 2);
      const fill = s.pattern === 'hatched' ? `url(#hatch-${si})` : s.color;
      out.push(`<rect x="${labelW}" y="${y}" width="${w.toFixed(1)}" height="${barH}" fill="${fill}" stroke="${s.color}"/>`);
      out.push(`<text x="${(labelW + w + 4).toFixed(1)}" y="${y + barH - 2}" ${FONT} font-size="9">${escapeXml(fmt(v))}</text>`);
    });
  });
  const axisY = top + spec.rows.length * groupH;
  out.push(`<line x1="${labelW}" x2="${labelW + pw}" y1="${axisY}" y2="${axisY}" stroke="#444"/>`);
  for (const v of niceTicks(0, max, 5).filter((x) => x <= max)) {
    const x = labelW + (v / max) * pw;
    out.push(`<line x1="${x.toFixed(1)}" x2="${x.toFixed(1)}" y1="${axisY}" y2="${axisY + 4}" stroke="#444"/><text x="${x.toFixed(1)}" y="${axisY + 15}" text-anchor="middle" ${FONT} font-size="9">${escapeXml(fmt(v))}</text>`);
  }
  out.push(`<text x="${labelW + pw / 2}" y="${axisY + 30}" text-anchor="middle" ${FONT} font-size="11">${escapeXml(spec.valueLabel)}</text>`);
  let lx = labelW;
  spec.series.forEach((s, i) => {
    out.push(`<rect x="${lx}" y="${H - 14}" width="18" height="9" fill="${s.pattern === 'hatched' ? `url(#hatch-${i})` : s.color}" stroke="${s.color}"/><text x="${lx + 22}" y="${H - 6}" ${FONT} font-size="10">${escapeXml(s.name)}</text>`);
    lx += 40 + s.name.length * 6;
  });
  out.push('</svg>');
  return out.join('');
}
