/** Version page: replay held-out batches through the version (false alarms, detection, endpoint). */
import { useState } from 'preact/hooks';
import type { BatchSummary, EvaluationResult, ModelVersionDetail } from '../../../../core/api/rest.ts';
import { api } from '../../api/endpoints.ts';
import { errorText } from '../../api/problem.ts';
import { useAsync } from '../../components/use-async.ts';
import { Badge, ErrorBox } from '../../components/status.tsx';
import { dateTime, fixed, minutes, percent, sig } from '../../format/number-format.ts';
import { summariseEvaluation } from '../bench-data.ts';
import { endpointAsRun, suspectReasons } from './batch-suspect.ts';

export function Evaluation({ d, onDone }: { d: ModelVersionDetail; onDone: () => void }) {
  const batches = useAsync(() => api.batches({ status: 'ended', product: d.product, limit: 500 }), [d.product]);
  const held = (batches.data?.items ?? []).filter((b) => !d.referenceBatches.includes(b.id));
  const [chosen, setChosen] = useState<string[]>([]);
  // the known-faulty marks are stored with the evaluation (where the server keeps them): reopening shows what the evaluator marked
  const [faulty, setFaulty] = useState<Set<string>>(new Set(d.evaluations[d.evaluations.length - 1]?.faulty ?? []));
  const [result, setResult] = useState<EvaluationResult | null>(d.evaluations[d.evaluations.length - 1] ?? null);
  const [error, setError] = useState<string | null>(null);
  const [busy, setBusy] = useState(false);
  const starts = new Map((batches.data?.items ?? []).map((b: BatchSummary) => [b.id, b.startedAt]));
  const run = async () => {
    setBusy(true);
    setError(null);
    try {
      setResult(await api.evaluate(d.versionId, chosen, chosen.filter((b) => faulty.has(b))));
      onDone();
    } catch (e) {
      setError(errorText(e));
    } finally {
      setBusy(false);
    }
  };
  const sum = result ? summariseEvaluation(result, faulty, starts) : null;
  return (
    <div class="panel" data-testid="evaluation">
      <h3>Evaluation on held-out batches</h3>
      {batches.error && <ErrorBox message={batches.error} />}
      {batches.data && held.length === 0 && <p class="muted">No finished batches of {d.product} outside the reference set.</p>}
      {held.length > 0 && (
        <table class="batch-table">
          <thead>
            <tr>
              <th scope="col">evaluate</th>
              <th scope="col">batch</th>
              <th scope="col">known faulty</th>
              <th scope="col" class="num">spectra</th>
              <th scope="col" class="num">alarms</th>
              <th scope="col">end reason</th>
              <th scope="col">endpoint as run</th>
            </tr>
          </thead>
          <tbody>
            {held.map((b) => {
              const why = suspectReasons(b);
              return (
              <tr key={b.id} class={why.length ? 'row-suspect' : ''}>
                <td>
                  <input type="checkbox" aria-label={`evaluate ${b.id}`} checked={chosen.includes(b.id)} onChange={(e) => setChosen((c) => ((e.target as HTMLInputElement).checked ? [...c, b.id] : c.filter((x) => x !== b.id)))} />
                </td>
                <td>
                  {b.id}
                  {why.length > 0 && (
                    <div class="suspect-why small">
                      <Badge tone="warn">⚠ suspect</Badge> {why.join('; ')}
                    </div>
                  )}
                </td>
                <td>
                  <label>
                    <input type="checkbox" aria-label={`${b.id} is known faulty`} checked={faulty.has(b.id)} onChange={() => setFaulty((f) => ((n) => (n.has(b.id) ? n.delete(b.id) : n.add(b.id), n))(new Set(f)))} />
                    {why.length > 0 && !faulty.has(b.id) && <span class="small muted"> (suggested)</span>}
                  </label>
                </td>
                <td class="num">{b.spectrumCount}</td>
                <td class="num">{b.alarmCount > 0 ? <Badge tone="warn">{b.alarmCount}</Badge> : '0'}</td>
                <td class="small">{b.endReason ?? '—'}</td>
                <td class="small">{endpointAsRun(b)}</td>
              </tr>
              );
            })}
          </tbody>
        </table>
      )}
      <button type="button" class="btn" disabled={busy || chosen.length === 0} onClick={run}>
        {busy ? 'Evaluating…' : `Evaluate on ${chosen.length} batches`}
      </button>
      {error && <ErrorBox message={error} />}
      {result && sum && (
        <>
          <dl class="facts inline">
            <dt>False-alarm rate (good batches with an alarm)</dt>
            <dd>{sum.good.falseAlarmRate === null ? 'no good batches evaluated' : `${sum.good.withAlarm} of ${sum.good.batches} (${percent(sum.good.falseAlarmRate)})`}</dd>
            <dt>Single points outside limits (good batches)</dt>
            <dd>{percent(sum.good.pointsOutsideRate, 1)}</dd>
            <dt>Detection (known faulty)</dt>
            <dd>{sum.faulty.batches ? `${sum.faulty.detected} of ${sum.faulty.batches}; mean delay from batch start ${minutes(sum.faulty.meanDelayMin)}` : 'no batch marked faulty'}</dd>
            <dt>Endpoint reached</dt>
            <dd>
              {sum.endpoint.reached} of {sum.endpoint.batches}
            </dd>
          </dl>
          <table class="batch-table">
            <thead>
              <tr>
                <th scope="col">batch</th>
                <th scope="col" class="num">spectra</th>
                <th scope="col" class="num">points outside</th>
                <th scope="col" class="num">alarms</th>
                <th scope="col">first alarm</th>
                <th scope="col">endpoint at</th>
                <th scope="col" class="num">max T²</th>
                <th scope="col" class="num">max Q</th>
              </tr>
            </thead>
            <tbody>
              {result.batches.map((b) => (
                <tr key={b.batch}>
                  <td>
                    {b.batch} {faulty.has(b.batch) && <Badge tone="warn">faulty</Badge>}
                  </td>
                  <td class="num">{b.spectra}</td>
                  <td class="num">{b.pointsOutside}</td>
                  <td class="num">{b.alarms}</td>
                  <td>{b.firstAlarmAt ? `${minutes((b.firstAlarmAt - (starts.get(b.batch) ?? b.firstAlarmAt)) / 60000)} (${b.firstAlarmKind})` : '—'}</td>
                  <td>{b.endpointAt ? minutes((b.endpointAt - (starts.get(b.batch) ?? b.endpointAt)) / 60000) : 'not reached'}</td>
                  <td class="num">{sig(b.maxT2)}</td>
                  <td class="num">{sig(b.maxQ)}</td>
                </tr>
              ))}
            </tbody>
          </table>
          <p class="muted small">
            Evaluated {dateTime(result.createdAt)} by {result.createdBy}. Times are from batch start; endpoint error needs the true endpoint, which the server records only for simulated batches ({fixed(result.batches.length, 0)} batches here).
          </p>
        </>
      )}
    </div>
  );
}
