import type { Contributions } from '../../../core/monitor/types.ts';
import { regionShares } from './review-data.ts';

export type ContributionKind = 'q' | 't2' | 'rbcQ' | 'rbcT2';

/** [axis, values] for the chosen kind, sorted by wavelength (uPlot needs ascending x). */
export function contributionSeries(c: Contributions, kind: ContributionKind): [number[], number[]] {
  const v = c[kind];
  const idx = c.axis.map((_, i) => i).sort((a, b) => c.axis[a] - c.axis[b]);
  return [idx.map((i) => c.axis[i]), idx.map((i) => v[i])];
}

/** Regions ordered by their share of the statistic, largest first. */
export function topRegions(c: Contributions, by: 't2' | 'q', n: number): Contributions['regions'] {
  return [...c.regions].sort((a, b) => Math.abs(b[by]) - Math.abs(a[by])).slice(0, n);
}

/** Regions with their shares of the statistic, largest share first. */
export function topShares(c: Contributions, by: 't2' | 'q', n: number): ReturnType<typeof regionShares> {
  const k = by === 't2' ? 't2Share' : 'qShare';
  return regionShares(c).sort((a, b) => Math.abs(b[k]) - Math.abs(a[k])).slice(0, n);
}
