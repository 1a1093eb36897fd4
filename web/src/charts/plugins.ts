/** uPlot plugins drawing on the canvas: envelope band, named limit lines, markers, wavelength regions. */
import uPlot from 'uplot';
import type { Band } from './envelope-band.ts';
import { bandPolygon, classify } from './envelope-band.ts';
import type { MarkerShape, SeriesStyle } from '../theme/palette.ts';
import { STYLE } from '../theme/palette.ts';

const px = (u: uPlot, v: number, key: string) => u.valToPos(v, key, true);

/**
 * The golden envelope: filled band, its edges, and the golden mean dashed, under the series. The
 * layer is drawn once into an offscreen canvas and reused while scales and size stay the same, so a
 * live chart redrawing every frame pays only one drawImage for it.
 */
export function envelopePlugin(getBand: () => Band | null, yKey = 'y'): uPlot.Plugin {
  let cache: HTMLCanvasElement | null = null;
  let cacheKey = '';
  let cachedBand: Band | null = null;
  return {
    hooks: {
      drawClear: (u) => {
        const b = getBand();
        if (!b || b.x.length < 2) return;
        const sx = u.scales.x;
        const sy = u.scales[yKey];
        const key = `${sx.min},${sx.max},${sy.min},${sy.max},${u.bbox.left},${u.bbox.top},${u.bbox.width},${u.bbox.height},${u.ctx.canvas.width},${u.ctx.canvas.height}`;
        if (!cache || key !== cacheKey || b !== cachedBand) {
          cache ??= document.createElement('canvas');
          cache.width = u.ctx.canvas.width;
          cache.height = u.ctx.canvas.height;
          const ctx = cache.getContext('2d')!;
          ctx.clearRect(0, 0, cache.width, cache.height);
          drawBand(ctx, u, b, yKey);
          cacheKey = key;
          cachedBand = b;
        }
        u.ctx.drawImage(cache, 0, 0);
      },
    },
  };
}

function drawBand(ctx: CanvasRenderingContext2D, u: uPlot, b: Band, yKey: string): void {
  const poly = bandPolygon(b, (x) => px(u, x, 'x'), (y) => px(u, y, yKey));
  ctx.save();
  ctx.beginPath();
  ctx.rect(u.bbox.left, u.bbox.top, u.bbox.width, u.bbox.height);
  ctx.clip();
  ctx.beginPath();
  ctx.moveTo(poly[0], poly[1]);
  for (let i = 2; i < poly.length; i += 2) ctx.lineTo(poly[i], poly[i + 1]);
  ctx.closePath();
  ctx.fillStyle = STYLE.envelope.fill!;
  ctx.fill();
  ctx.lineWidth = STYLE.envelope.width * uPlot.pxRatio;
  ctx.strokeStyle = STYLE.envelope.stroke;
  ctx.stroke();
  strokePath(ctx, b.x, b.mean, (x) => px(u, x, 'x'), (y) => px(u, y, yKey), STYLE.goldenMean);
  ctx.restore();
}

function strokePath(
  ctx: CanvasRenderingContext2D,
  xs: ArrayLike<number>,
  ys: ArrayLike<number>,
  fx: (x: number) => number,
  fy: (y: number) => number,
  style: SeriesStyle,
): void {
  ctx.beginPath();
  let pen = false;
  for (let i = 0; i < xs.length; i++) {
    if (!Number.isFinite(ys[i])) {
      pen = false;
      continue;
    }
    const X = fx(xs[i]);
    const Y = fy(ys[i]);
    if (pen) ctx.lineTo(X, Y);
    else ctx.moveTo(X, Y);
    pen = true;
  }
  ctx.setLineDash(style.dash.map((d) => d * uPlot.pxRatio));
  ctx.lineWidth = style.width * uPlot.pxRatio;
  ctx.strokeStyle = style.stroke;
  ctx.stroke();
  ctx.setLineDash([]);
}

export interface LimitLine {
  value: number;
  /** e.g. "T² limit (99 %)" — drawn beside the line. */
  label: string;
  style: SeriesStyle;
}

/** Horizontal limit lines, each with its name written at the right end. */
export function limitLinesPlugin(getLines: () => LimitLine[], yKey = 'y'): uPlot.Plugin {
  return {
    hooks: {
      draw: (u) => {
        const ctx = u.ctx;
        const { left, top, width, height } = u.bbox;
        ctx.save();
        // labels sit above their line, or under it where an earlier label already takes that place
        const placed: [number, number][] = [];
        for (const l of getLines()) {
          if (!Number.isFinite(l.value)) continue;
          const y = px(u, l.value, yKey);
          if (y < top - 1 || y > top + height + 1) continue;
          ctx.beginPath();
          ctx.setLineDash(l.style.dash.map((d) => d * uPlot.pxRatio));
          ctx.lineWidth = l.style.width * uPlot.pxRatio;
          ctx.strokeStyle = l.style.stroke;
          ctx.moveTo(left, y);
          ctx.lineTo(left + width, y);
          ctx.stroke();
          ctx.setLineDash([]);
          if (!l.label) continue;
          const fs = 11 * uPlot.pxRatio;
          ctx.font = `600 ${fs}px system-ui, sans-serif`;
          const tw = ctx.measureText(l.label).width;
          const tx = left + width - tw - 6 * uPlot.pxRatio;
          const above = y - 4 * uPlot.pxRatio;
          const below = y + fs + 4 * uPlot.pxRatio;
          const clash = (t: number) => placed.some(([a, b]) => t > a - 2 && t - fs < b + 2);
          const ty = (clash(above) || above - fs < top) && below <= top + height && !clash(below) ? below : above;
          placed.push([ty - fs, ty]);
          ctx.fillStyle = 'rgba(255,255,255,0.85)';
          ctx.fillRect(tx - 3 * uPlot.pxRatio, ty - fs, tw + 6 * uPlot.pxRatio, fs + 3 * uPlot.pxRatio);
          ctx.fillStyle = l.style.stroke;
          ctx.fillText(l.label, tx, ty);
        }
        ctx.restore();
      },
    },
  };
}

export function drawMarker(ctx: CanvasRenderingContext2D, shape: MarkerShape, x: number, y: number, r: number): void {
  ctx.beginPath();
  switch (shape) {
    case 'triangle-up':
      ctx.moveTo(x, y - r);
      ctx.lineTo(x + r, y + r * 0.8);
      ctx.lineTo(x - r, y + r * 0.8);
      ctx.closePath();
      break;
    case 'triangle-down':
      ctx.moveTo(x, y + r);
      ctx.lineTo(x + r, y - r * 0.8);
      ctx.lineTo(x - r, y - r * 0.8);
      ctx.closePath();
      break;
    case 'square':
      ctx.rect(x - r * 0.8, y - r * 0.8, r * 1.6, r * 1.6);
      break;
    case 'diamond':
      ctx.moveTo(x, y - r);
      ctx.lineTo(x + r, y);
      ctx.lineTo(x, y + r);
      ctx.lineTo(x - r, y);
      ctx.closePath();
      break;
    case 'cross':
      ctx.moveTo(x - r, y - r);
      ctx.lineTo(x + r, y + r);
      ctx.moveTo(x + r, y - r);
      ctx.lineTo(x - r, y + r);
      break;
    case 'circle':
      ctx.arc(x, y, r, 0, Math.PI * 2);
      break;
    case 'none':
      return;
  }
}

/**
 * Markers on points of series `seriesIdx` outside the band (▲ above, ▼ below) or above a limit
 * (▲). The status of each point comes, in order of preference, from a precomputed column
 * (1 above, −1 below, as the monitor judged it), from a limit per point, or from the band.
 * Only points in the visible x range are visited; at most one marker per 10 px, so dense runs of
 * markers do not hide the line.
 */
export function outsideMarkersPlugin(
  seriesIdx: number,
  getTest: () => { status?: ArrayLike<number> | null; band?: Band | null; limit?: (i: number) => number },
  yKey = 'y',
): uPlot.Plugin {
  return {
    hooks: {
      draw: (u) => {
        const xs = u.data[0] as ArrayLike<number>;
        const ys = u.data[seriesIdx] as ArrayLike<number | null>;
        if (!xs || !ys || xs.length === 0) return;
        const test = getTest();
        const status = test.status && test.status.length === xs.length ? test.status : null;
        const i0 = u.series[0].idxs?.[0] ?? 0;
        const i1 = u.series[0].idxs?.[1] ?? xs.length - 1;
        const ctx = u.ctx;
        const r = 3.5 * uPlot.pxRatio;
        ctx.save();
        ctx.fillStyle = STYLE.outside.stroke;
        ctx.strokeStyle = '#fff';
        ctx.lineWidth = 1 * uPlot.pxRatio;
        let lastX = -Infinity;
        for (let i = i0; i <= i1; i++) {
          let shape: MarkerShape | null = null;
          if (status) {
            const st = status[i];
            if (st === 1) shape = 'triangle-up';
            else if (st === -1) shape = 'triangle-down';
            else continue;
          }
          const y = ys[i];
          if (y === null || y === undefined || !Number.isFinite(y)) continue;
          if (!shape && test.limit) {
            const lim = test.limit(i);
            if (Number.isFinite(lim) && y > lim) shape = 'triangle-up';
          }
          if (!shape && !status && test.band) {
            const s = classify(test.band, xs[i], y);
            if (s === 'above') shape = 'triangle-up';
            else if (s === 'below') shape = 'triangle-down';
          }
          if (!shape) continue;
          const X = px(u, xs[i], 'x');
          if (X - lastX < 10 * uPlot.pxRatio) continue;
          lastX = X;
          drawMarker(ctx, shape, X, px(u, y, yKey), r);
          ctx.fill();
          ctx.stroke();
        }
        ctx.restore();
      },
    },
  };
}

/** A vertical marker at an x value with a label (selected point, endpoint, first exit). */
export function verticalMarkersPlugin(getMarks: () => { x: number; label: string; style: SeriesStyle }[]): uPlot.Plugin {
  return {
    hooks: {
      draw: (u) => {
        const ctx = u.ctx;
        const { top, height, left, width } = u.bbox;
        ctx.save();
        let row = 0;
        for (const m of getMarks()) {
          if (!Number.isFinite(m.x)) continue;
          const X = px(u, m.x, 'x');
          if (X < left || X > left + width) continue;
          ctx.beginPath();
          ctx.setLineDash(m.style.dash.map((d) => d * uPlot.pxRatio));
          ctx.strokeStyle = m.style.stroke;
          ctx.lineWidth = m.style.width * uPlot.pxRatio;
          ctx.moveTo(X, top);
          ctx.lineTo(X, top + height);
          ctx.stroke();
          ctx.setLineDash([]);
          ctx.font = `600 ${11 * uPlot.pxRatio}px system-ui, sans-serif`;
          ctx.fillStyle = m.style.stroke;
          const tw = ctx.measureText(m.label).width;
          // Right of the line, or left of it near the right edge; one text row per marker so labels never overlap.
          let tx = X + 4 * uPlot.pxRatio;
          if (tx + tw > left + width) tx = X - tw - 4 * uPlot.pxRatio;
          tx = Math.max(left + 2 * uPlot.pxRatio, tx);
          const ty = top + (12 + 13 * row) * uPlot.pxRatio;
          ctx.fillStyle = 'rgba(255,255,255,0.85)';
          ctx.fillRect(tx - 2, ty - 11 * uPlot.pxRatio, tw + 4, 14 * uPlot.pxRatio);
          ctx.fillStyle = m.style.stroke;
          ctx.fillText(m.label, tx, ty);
          row++;
        }
        ctx.restore();
      },
    },
  };
}

/** Shaded wavelength regions (band assignments) with their names, alternating fills. */
export function regionsPlugin(getRegions: () => { from: number; to: number; name: string }[], fills: string[]): uPlot.Plugin {
  return {
    hooks: {
      drawClear: (u) => {
        const ctx = u.ctx;
        const { top, height } = u.bbox;
        ctx.save();
        getRegions().forEach((r, k) => {
          const x0 = px(u, Math.min(r.from, r.to), 'x');
          const x1 = px(u, Math.max(r.from, r.to), 'x');
          ctx.fillStyle = fills[k % fills.length];
          ctx.fillRect(x0, top, x1 - x0, height);
          // hatch every other region so neighbours differ without colour
          if (k % 2 === 1) {
            ctx.beginPath();
            ctx.strokeStyle = 'rgba(0,0,0,0.12)';
            ctx.lineWidth = 1;
            for (let x = x0 - height; x < x1; x += 8 * uPlot.pxRatio) {
              ctx.moveTo(Math.max(x, x0), top + (Math.max(x, x0) - x));
              ctx.lineTo(Math.min(x + height, x1), top + (Math.min(x + height, x1) - x));
            }
            ctx.stroke();
          }
          ctx.font = `${10 * uPlot.pxRatio}px system-ui, sans-serif`;
          ctx.fillStyle = '#333';
          // Name the region only where the name fits; the table beside the chart names them all.
          if (ctx.measureText(r.name).width + 6 * uPlot.pxRatio <= x1 - x0) ctx.fillText(r.name, x0 + 3 * uPlot.pxRatio, top + 11 * uPlot.pxRatio);
        });
        ctx.restore();
      },
    },
  };
}
