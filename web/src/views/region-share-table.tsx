/** The wavelength regions with their band assignments and shares of T² and Q, as a table that adds up to 100 %. */
import { percent, sig } from '../format/number-format.ts';
import { withRemainder } from './review-data.ts';
import { assignmentName } from '../../../core/vocabulary/plain-names.ts';

export interface RegionShareRow {
  name: string;
  from: number | null;
  to: number | null;
  assignment: string;
  t2Share: number;
  qShare: number;
}

/**
 * `rows`: the largest regions, with shares over all regions; a last row holds the regions not shown
 * (`totalRegions` of them in all, when known), so each share column adds up to 100 %.
 */
export function RegionShareTable({ caption, rows, totalRegions }: { caption: string; rows: RegionShareRow[]; totalRegions?: number }) {
  const all = withRemainder(rows, totalRegions);
  return (
    <table class="regions" data-testid="region-shares">
      <caption>{caption}</caption>
      <thead>
        <tr>
          <th scope="col">region</th>
          <th scope="col">nm</th>
          <th scope="col">assignment</th>
          <th scope="col" class="num">share of T²</th>
          <th scope="col" class="num">share of Q</th>
        </tr>
      </thead>
      <tbody>
        {all.map((r) => (
          <tr key={r.name}>
            <td>{r.name}</td>
            <td>{r.from === null || r.to === null ? '' : `${sig(r.from, 4)}–${sig(r.to, 4)}`}</td>
            <td>{assignmentName(r.assignment)}</td>
            <td class="num">{percent(r.t2Share)}</td>
            <td class="num">{percent(r.qShare)}</td>
          </tr>
        ))}
      </tbody>
      <tfoot>
        <tr>
          <th scope="row" colSpan={3}>
            total
          </th>
          <td class="num">{percent(all.reduce((a, r) => a + (Number.isFinite(r.t2Share) ? r.t2Share : 0), 0))}</td>
          <td class="num">{percent(all.reduce((a, r) => a + (Number.isFinite(r.qShare) ? r.qShare : 0), 0))}</td>
        </tr>
        <tr>
          <td colSpan={5} class="muted small">
            Share of T²: the region's sum of |T² contribution| over the whole axis's (T² contributions can be negative). Share of Q: the region's sum of squared
            residuals over Q. Regions do not overlap; wavelengths with no assigned band form their own "other" regions.
          </td>
        </tr>
      </tfoot>
    </table>
  );
}
