/** Sort an axis ascending (uPlot needs ascending x) and reorder series with it. */
export function sortedByAxis(axis: ArrayLike<number>, series: ArrayLike<number>[]): { axis: number[]; series: number[][] } {
  const idx = Array.from({ length: axis.length }, (_, i) => i);
  let ascending = true;
  for (let i = 1; i < axis.length; i++) if (axis[i] < axis[i - 1]) ascending = false;
  if (!ascending) idx.sort((a, b) => axis[a] - axis[b]);
  return { axis: idx.map((i) => axis[i]), series: series.map((s) => idx.map((i) => s[i])) };
}
