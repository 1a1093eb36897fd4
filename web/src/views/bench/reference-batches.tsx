/**
 * Builder: the finished batches to choose from, with the endpoint of each chosen one — from its lab
 * values (empty), or marked by minutes, spectrum or "last".
 */
import type { BatchSummary } from '../../../../core/api/rest.ts';
import { Badge } from '../../components/status.tsx';
import { dateTime } from '../../format/number-format.ts';
import { FieldError } from './field-error.tsx';
import { endpointAsRun, suspectReasons } from './batch-suspect.ts';

/** Batch ids a refusal names in quotes ("b1" (no lab values), …), so their rows can be marked. */
export function batchesNamed(text: string | undefined, among: string[]): Set<string> {
  const out = new Set<string>();
  for (const m of (text ?? '').matchAll(/"([^"]+)"/g)) if (among.includes(m[1]!)) out.add(m[1]!);
  return out;
}

export function ReferenceBatches({
  shown,
  chosen,
  onChosen,
  ends,
  onEnds,
  onPreview,
  errors,
}: {
  shown: BatchSummary[];
  chosen: string[];
  onChosen: (c: string[]) => void;
  ends: Record<string, string>;
  onEnds: (e: Record<string, string>) => void;
  onPreview: (batch: string) => void;
  errors: { referenceBatches?: string; referenceEndpoints?: string; marks: Record<string, string> };
}) {
  const named = batchesNamed(`${errors.referenceEndpoints ?? ''} ${errors.referenceBatches ?? ''}`, chosen);
  return (
    <fieldset class="batch-pick" data-testid="reference-batches">
      <legend>Reference batches (good batches only) — {chosen.length} chosen</legend>
      <FieldError text={errors.referenceBatches} />
      <table class="batch-table">
        <thead>
          <tr>
            <th scope="col">use</th>
            <th scope="col">batch</th>
            <th scope="col">unit</th>
            <th scope="col">product</th>
            <th scope="col">started</th>
            <th scope="col" class="num">spectra</th>
            <th scope="col" class="num">alarms</th>
            <th scope="col">endpoint as run</th>
            <th scope="col">endpoint</th>
            <th scope="col">preview</th>
          </tr>
        </thead>
        <tbody>
          {shown.map((b) => {
            const why = suspectReasons(b);
            return (
            <tr key={b.id} class={named.has(b.id) || errors.marks[b.id] ? 'row-alarm' : why.length ? 'row-suspect' : ''} data-testid={`ref-row-${b.id}`}>
              <td>
                {/* a batch whose record says it may be faulty is taken as good only on purpose */}
                <label class={why.length ? 'suspect-pick' : ''}>
                  <input
                    type="checkbox"
                    aria-label={why.length ? `use ${b.id} anyway (suspect: ${why.join('; ')})` : `use ${b.id}`}
                    data-testid={`ref-${b.id}`}
                    checked={chosen.includes(b.id)}
                    onChange={(e) => onChosen((e.target as HTMLInputElement).checked ? [...chosen, b.id] : chosen.filter((x) => x !== b.id))}
                  />
                  {why.length > 0 && <span class="small"> anyway</span>}
                </label>
              </td>
              <td>
                {b.id}
                {why.length > 0 && (
                  <div class="suspect-why small" data-testid="suspect-why">
                    <Badge tone="warn">⚠ suspect</Badge> {why.join('; ')}
                  </div>
                )}
              </td>
              <td>{b.unit}</td>
              <td>{b.product}</td>
              <td>{dateTime(b.startedAt)}</td>
              <td class="num">{b.spectrumCount}</td>
              <td class="num">{b.alarmCount > 0 ? <Badge tone="warn">{b.alarmCount}</Badge> : '0'}</td>
              <td class="small">{endpointAsRun(b)}</td>
              <td>
                <input
                  class="endpoint-mark"
                  size={9}
                  aria-label={`endpoint of ${b.id}`}
                  data-testid={`end-${b.id}`}
                  placeholder="lab values"
                  value={ends[b.id] ?? ''}
                  onInput={(e) => onEnds({ ...ends, [b.id]: (e.target as HTMLInputElement).value })}
                />
                <FieldError text={errors.marks[b.id]} />
              </td>
              <td>
                <button type="button" class="btn small" onClick={() => onPreview(b.id)}>
                  chain preview
                </button>
              </td>
            </tr>
            );
          })}
        </tbody>
      </table>
      <FieldError text={errors.referenceEndpoints} id="reference-endpoints-error" />
      <p class="muted small">
        Endpoint: where the batch really reached its end. Empty takes it from lab values crossing the target; otherwise give minutes from the batch start (52.5), a
        spectrum (#316), or "last" only if the batch really ended at its last spectrum — operators stop late, so the last spectrum is never taken as the endpoint
        unless you say so. Rules with automatic thresholds (moving-block SD, plateau, golden end, the minimum time) are calibrated at these endpoints and need one for
        every reference batch.
      </p>
    </fieldset>
  );
}
