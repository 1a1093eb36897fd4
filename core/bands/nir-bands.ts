/**
 * Named NIR wavelength regions with their usual band assignments, for reading contributions.
 * Positions are common practice, after Workman & Weyer, Practical Guide to Interpretive
 * Near-Infrared Spectroscopy (CRC Press, 2008) — marked from memory: region edges are
 * approximate, chosen here around the band centres (liquid water near 970, 1190, 1450 and
 * 1940 nm; C–H overtones near 1200 and 1700 nm; N–H near 1500 nm; combination bands above 2000 nm).
 */

export interface NirRegion {
  name: string;
  from: number; // nm
  to: number; // nm
  assignment: string;
}

export const NIR_REGIONS: readonly NirRegion[] = [
  { name: 'water-970', from: 940, to: 1000, assignment: 'O–H second overtone (water), from memory' },
  { name: 'ch-2nd-1150', from: 1100, to: 1170, assignment: 'C–H second overtone, from memory' },
  { name: 'water-1190', from: 1170, to: 1230, assignment: 'O–H combination (water) overlapping C–H second overtone, from memory' },
  { name: 'ch-comb-1390', from: 1340, to: 1420, assignment: 'C–H combination, from memory' },
  { name: 'water-1450', from: 1420, to: 1480, assignment: 'O–H first overtone (water), from memory' },
  { name: 'nh-1500', from: 1480, to: 1560, assignment: 'N–H first overtone, from memory' },
  { name: 'ch-1st-1700', from: 1650, to: 1780, assignment: 'C–H first overtone, from memory' },
  { name: 'water-1940', from: 1900, to: 1980, assignment: 'O–H combination (water), from memory' },
  { name: 'nh-comb-2050', from: 2000, to: 2100, assignment: 'N–H combination, from memory' },
  { name: 'ch-comb-2300', from: 2250, to: 2400, assignment: 'C–H combination, from memory' },
];

/** The regions that overlap an axis range; gaps between named regions are reported as 'other'. */
export function regionsForAxis(axis: ArrayLike<number>, regions: readonly NirRegion[] = NIR_REGIONS): NirRegion[] {
  if (axis.length === 0) return [];
  let lo = Infinity;
  let hi = -Infinity;
  for (let i = 0; i < axis.length; i++) { lo = Math.min(lo, axis[i]); hi = Math.max(hi, axis[i]); }
  return regions.filter((r) => r.to >= lo && r.from <= hi);
}

/** Region of one wavelength (first match), or null. */
export function regionOf(nm: number, regions: readonly NirRegion[] = NIR_REGIONS): NirRegion | null {
  for (const r of regions) if (nm >= r.from && nm < r.to) return r;
  return null;
}

/**
 * Sum per-variable values over the named regions. Variables in no named region are grouped by
 * contiguous runs along the axis, each run its own 'other' region named by where it starts
 * ('other-1002'), so regions never overlap. Each region's from/to are the lowest and highest
 * wavelengths of the axis that fell in it. Returns one entry per region present, in wavelength order;
 * every variable is in exactly one region, so the region sums add up to the totals.
 */
export function sumByRegion(axis: ArrayLike<number>, values: ArrayLike<number>[], regions: readonly NirRegion[] = NIR_REGIONS): { region: NirRegion; sums: number[] }[] {
  const order = Array.from({ length: axis.length }, (_, j) => j).sort((a, b) => axis[a] - axis[b]);
  const out: { region: NirRegion; sums: number[] }[] = [];
  const byName = new Map<string, { region: NirRegion; sums: number[] }>();
  let run: { region: NirRegion; sums: number[] } | null = null; // the 'other' run being extended
  for (const j of order) {
    const nm = axis[j];
    const named = regionOf(nm, regions);
    let e: { region: NirRegion; sums: number[] };
    if (named) {
      run = null;
      const hit = byName.get(named.name);
      if (hit) e = hit;
      else {
        e = { region: { ...named, from: nm, to: nm }, sums: values.map(() => 0) };
        byName.set(named.name, e);
        out.push(e);
      }
    } else {
      if (!run) {
        run = { region: { name: `other-${Math.round(nm)}`, from: nm, to: nm, assignment: 'no assigned band' }, sums: values.map(() => 0) };
        out.push(run);
      }
      e = run;
    }
    if (nm < e.region.from) e.region.from = nm;
    if (nm > e.region.to) e.region.to = nm;
    for (let v = 0; v < values.length; v++) e.sums[v] += values[v][j];
  }
  return out.sort((a, b) => a.region.from - b.region.from);
}
