import { describe, expect, it } from 'vitest';
import { NIR_REGIONS, sumByRegion } from '../../core/bands/nir-bands.ts';

describe('contributions summed by wavelength region', () => {
  // a dryer-like axis, 950–1650 nm every 2.5 nm, given descending as some instruments write it
  const axis = Array.from({ length: 281 }, (_, i) => 1650 - 2.5 * i);
  const v = axis.map((nm) => Math.sin(nm / 37));
  const regions = sumByRegion(axis, [v, v.map(Math.abs)]);

  it('regions do not overlap, each wavelength is in exactly one, and sums add up to the totals', () => {
    for (let i = 1; i < regions.length; i++) expect(regions[i]!.region.from).toBeGreaterThan(regions[i - 1]!.region.to);
    for (const nm of axis) expect(regions.filter((r) => nm >= r.region.from && nm <= r.region.to)).toHaveLength(1);
    expect(new Set(regions.map((r) => r.region.name)).size).toBe(regions.length);
    const total = v.reduce((a, x) => a + x, 0);
    expect(regions.reduce((a, r) => a + r.sums[0]!, 0)).toBeCloseTo(total, 10);
  });
  it('wavelengths with no assigned band form one "other" region per gap, not one spanning the axis', () => {
    const other = regions.filter((r) => r.region.name.startsWith('other'));
    // named regions on 950–1650: 940–1000, 1100–1170, 1170–1230, 1340–1420, 1420–1480, 1480–1560;
    // gaps: 1000–1100, 1230–1340, 1560–1650 (1650 itself starts ch-1st-1700)
    expect(other.map((r) => [r.region.from, r.region.to])).toEqual([[1000, 1097.5], [1230, 1337.5], [1560, 1647.5]]);
    expect(other.map((r) => r.region.name)).toEqual(['other-1000', 'other-1230', 'other-1560']);
    const named = regions.filter((r) => !r.region.name.startsWith('other')).map((r) => r.region.name);
    expect(named).toEqual(['water-970', 'ch-2nd-1150', 'water-1190', 'ch-comb-1390', 'water-1450', 'nh-1500', 'ch-1st-1700']);
    // a named region reports the wavelengths of the axis that fell in it
    expect(regions.find((r) => r.region.name === 'water-970')!.region).toMatchObject({ from: 950, to: 997.5 });
    expect(NIR_REGIONS.find((r) => r.name === 'water-970')).toMatchObject({ from: 940, to: 1000 });
  });
});
