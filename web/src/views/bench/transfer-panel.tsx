/**
 * Version page: the calibration transfer a version carries (docs/calibration-transfer.md) — the
 * transform, the version it came from, the transfer sets, and its judgement on the held-out sets:
 * the old analyzer, the new one without transfer and with it, side by side, before approval.
 */
import type { CalibrationTransferView, TransferSideStats } from '../../../../core/api/rest.ts';
import { Badge } from '../../components/status.tsx';
import { dateTime, limitName, percent, sig } from '../../format/number-format.ts';

function Row({ label, s, n }: { label: string; s: TransferSideStats; n: number }) {
  return (
    <tr>
      <th scope="row">{label}</th>
      <td class="num">{s.t2Beyond}</td>
      <td class="num">{s.qBeyond}</td>
      <td class="num">
        {s.beyond} of {n} ({percent(s.rate, 1)})
      </td>
      <td class="num">
        {percent(s.interval[0], 1)}–{percent(s.interval[1], 1)}
      </td>
      <td class="num">{sig(s.t2Median)}</td>
      <td class="num">{sig(s.qMedian)}</td>
    </tr>
  );
}

export function TransferPanel({ t }: { t: CalibrationTransferView | null | undefined }) {
  if (!t) return null;
  const j = t.judgement;
  const p = j.property;
  const off = j.farAbove || p?.off === true;
  return (
    <div class="panel" data-testid="transfer-panel">
      <h3>Calibration transfer to a new analyzer</h3>
      <p class="small">
        {t.method === 'pds' ? `Piecewise direct standardisation, window ${t.window} pixels` : 'Direct standardisation'} (Wang, Veltkamp &amp; Kowalski 1991), rank kept{' '}
        {t.rank.min === t.rank.max ? t.rank.min : `${t.rank.min}–${t.rank.max}`} (rcond {sig(t.rcond)}
        {t.maxRank !== null ? `, at most ${t.maxRank}` : ''}). New analyzer {t.newAxis.points} points {sig(t.newAxis.from, 5)}–{sig(t.newAxis.to, 5)} nm → the model&apos;s {t.oldAxis.points} points{' '}
        {sig(t.oldAxis.from, 5)}–{sig(t.oldAxis.to, 5)} nm. From {t.source.name} v{t.source.version ?? '?'} (<span class="mono">{t.source.sha256.slice(0, 16)}…</span>), made {dateTime(t.createdAt)} by {t.author}. The
        transform is in the model file, under its hash.
      </p>
      <p class="small" data-testid="transfer-sets">
        Fitted on {t.fit.map((f) => `${f.old} / ${f.new} (${f.spectra})`).join(', ')}; judged on the held-out {t.heldOut.map((f) => `${f.old} / ${f.new} (${f.spectra})`).join(', ')}.
      </p>
      <p data-testid="transfer-verdict">
        {off ? <Badge tone="alarm">far off on the held-out samples: approval needs a signed override</Badge> : <Badge tone="ok">within the old analyzer&apos;s figures on the held-out samples</Badge>}
      </p>
      <table class="batch-table" data-testid="transfer-table">
        <caption class="small">
          {j.spectra} held-out transfer samples judged by the source version: spectra beyond the {limitName('T²', j.confidence)} ({sig(j.t2Limit)}) and the {limitName('Q', j.confidence)} ({sig(j.qLimit)})
        </caption>
        <thead>
          <tr>
            <th scope="col">spectra</th>
            <th scope="col" class="num">beyond T²</th>
            <th scope="col" class="num">beyond Q</th>
            <th scope="col" class="num">beyond either</th>
            <th scope="col" class="num">exact 95 % interval</th>
            <th scope="col" class="num">median T²</th>
            <th scope="col" class="num">median Q</th>
          </tr>
        </thead>
        <tbody>
          <Row label="old analyzer" s={j.old} n={j.spectra} />
          <Row label="new analyzer, no transfer (interpolated)" s={j.before} n={j.spectra} />
          <Row label="new analyzer, transferred" s={j.after} n={j.spectra} />
        </tbody>
      </table>
      <p class="small" data-testid="transfer-errors">
        RMS spectral difference from the old analyzer: {sig(j.spectralRms.before)} before, {sig(j.spectralRms.after)} after (absorbance units).
        {p && (
          <>
            {' '}
            Predicted {p.name}: RMS difference from the old analyzer&apos;s prediction {sig(p.vsOld.before)} before, {sig(p.vsOld.after)} after {p.unit}
            {p.rmsecv !== null && ` (the model's RMSECV ${sig(p.rmsecv)} ${p.unit})`}
            {p.vsLab
              ? `; against ${p.vsLab.n} lab values ${sig(p.vsLab.before)} before, ${sig(p.vsLab.after)} after (old analyzer ${sig(p.vsLab.old)}) ${p.unit}.`
              : '; no lab values within the model\u2019s range on the held-out samples.'}
          </>
        )}
      </p>
      <p class="small muted">{j.method}</p>
      <p class="small caution">{t.caution}</p>
    </div>
  );
}
