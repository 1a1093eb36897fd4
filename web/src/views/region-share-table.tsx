/** The wavelength regions with their band assignments and shares of T² and Q, as a table. */
import { percent, sig } from '../format/number-format.ts';

export interface RegionShareRow {
  name: string;
  from: number;
  to: number;
  assignment: string;
  t2Share: number;
  qShare: number;
}

export function RegionShareTable({ caption, rows }: { caption: string; rows: RegionShareRow[] }) {
  return (
    <table class="regions">
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
        {rows.map((r) => (
          <tr key={r.name}>
            <td>{r.name}</td>
            <td>
              {sig(r.from, 4)}–{sig(r.to, 4)}
            </td>
            <td>{r.assignment}</td>
            <td class="num">{percent(r.t2Share)}</td>
            <td class="num">{percent(r.qShare)}</td>
          </tr>
        ))}
      </tbody>
    </table>
  );
}
