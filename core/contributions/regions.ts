/** Sums of per-variable values over named wavelength regions (inclusive nm bounds). */
export interface Region {
  name: string;
  from: number;
  to: number;
}

export function sumOverRegions(
  axis: ArrayLike<number>,
  values: ArrayLike<number>,
  regions: readonly Region[],
): { name: string; value: number; count: number }[] {
  if (axis.length !== values.length) throw new RangeError(`region sums: axis has ${axis.length} points, values ${values.length}`);
  return regions.map((r, i) => {
    if (typeof r.name !== 'string' || r.name === '') throw new RangeError(`region ${i} has no name`);
    if (!Number.isFinite(r.from) || !Number.isFinite(r.to) || r.from > r.to) {
      throw new RangeError(`region '${r.name}': from ${r.from} nm to ${r.to} nm is not an increasing finite range`);
    }
    let s = 0;
    let count = 0;
    for (let j = 0; j < axis.length; j++) {
      const w = axis[j]!;
      if (w >= r.from && w <= r.to) {
        s += values[j]!;
        count++;
      }
    }
    return { name: r.name, value: s, count };
  });
}
