/**
 * Version page: run this version in shadow on a unit beside the deployed one (it judges the same live
 * spectra, its results are stored apart, it never signals or raises an alarm), compare the two on the
 * batches judged since, and promote it — the signed deploy, with the comparison kept in the
 * signature's record.
 */
import { useState } from 'preact/hooks';
import type { ShadowComparison, ShadowRun } from '../../../../core/api/model-life.ts';
import type { ModelVersionDetail } from '../../../../core/api/rest.ts';
import { api } from '../../api/endpoints.ts';
import { ApiError, errorText } from '../../api/problem.ts';
import { useAsync } from '../../components/use-async.ts';
import { Advisory, Badge, ErrorBox, Loading } from '../../components/status.tsx';
import { dateTime, fixed } from '../../format/number-format.ts';
import { FieldError } from './field-error.tsx';
import { endpointDifference, labText } from './model-life-data.ts';

export function ShadowPanel({ d, onDone }: { d: ModelVersionDetail; onDone: () => void }) {
  const runs = useAsync(() => api.shadowRuns({ versionId: d.versionId }), [d.versionId, d.status]);
  const units = useAsync(() => api.units(), []);
  const [unit, setUnit] = useState('');
  const [reason, setReason] = useState('');
  const [error, setError] = useState<string | null>(null);
  const [busy, setBusy] = useState(false);
  const items = runs.data?.items ?? [];
  const active = items.find((r) => r.endedAt === null) ?? null;
  return (
    <div class="panel" data-testid="shadow">
      <h3>Shadow run</h3>
      <p class="small">
        A version in shadow judges the same live spectra as the version deployed on the unit, from the next batch on. Its results are stored apart; it never signals the control system and raises no alarm an operator sees.
      </p>
      {runs.loading && !runs.data && <Loading what="shadow runs" />}
      {runs.error && <ErrorBox message={runs.error} onRetry={runs.reload} />}
      {!active && d.status !== 'retired' && (
        <form
          data-testid="shadow-start"
          onSubmit={async (e) => {
            e.preventDefault();
            setError(null);
            setBusy(true);
            try {
              await api.startShadow(unit, d.versionId, reason.trim());
              setReason('');
              runs.reload();
            } catch (err) {
              setError(errorText(err));
            } finally {
              setBusy(false);
            }
          }}
        >
          <label>
            Unit{' '}
            <select value={unit} onChange={(e) => setUnit((e.target as HTMLSelectElement).value)} required data-testid="shadow-unit">
              <option value="">choose…</option>
              {units.data?.items.map((u) => (
                <option key={u.id} value={u.id}>
                  {u.name} ({u.kind})
                </option>
              ))}
            </select>
          </label>{' '}
          <label>
            Reason <input value={reason} required onInput={(e) => setReason((e.target as HTMLInputElement).value)} data-testid="shadow-reason" />
          </label>{' '}
          <button class="btn" type="submit" disabled={busy || !unit || !reason.trim()} data-testid="shadow-start-button">
            Start shadow run
          </button>
          {error && <ErrorBox message={error} />}
        </form>
      )}
      {items.map((r) => (
        <RunView key={r.id} r={r} d={d} onChange={() => (runs.reload(), onDone())} />
      ))}
    </div>
  );
}

function RunView({ r, d, onChange }: { r: ShadowRun; d: ModelVersionDetail; onChange: () => void }) {
  const cmp = useAsync(() => api.shadowComparison(r.id), [r.id, r.batches, r.endedAt]);
  const [stopReason, setStopReason] = useState('');
  const [error, setError] = useState<string | null>(null);
  const batches = cmp.data?.run.batches ?? r.batches;
  return (
    <div class="shadow-run" data-testid={`shadow-run-${r.endedAt === null ? 'active' : 'ended'}`}>
      <p class="small">
        <Badge tone={r.endedAt === null ? 'info' : 'muted'}>{r.endedAt === null ? 'running in shadow' : 'ended'}</Badge> on <b>{r.unit}</b> since {dateTime(r.startedAt)} by {r.startedBy}
        {r.reason ? `: “${r.reason}”` : ''}
        {r.endedAt !== null ? ` — ended ${dateTime(r.endedAt)} by ${r.endedBy}${r.endReason ? `: “${r.endReason}”` : ''}` : ''}. {batches} batch{batches === 1 ? '' : 'es'} judged in shadow (a batch running now counts; the comparison takes ended ones).
      </p>
      <button class="btn" type="button" onClick={cmp.reload} data-testid="shadow-refresh">
        Refresh comparison
      </button>
      {cmp.error && <ErrorBox message={cmp.error} onRetry={cmp.reload} />}
      {cmp.data && <ComparisonView c={cmp.data} />}
      {r.endedAt === null && (
        <>
          <form
            class="inline-form"
            onSubmit={async (e) => {
              e.preventDefault();
              setError(null);
              try {
                await api.stopShadow(r.id, stopReason.trim());
                onChange();
              } catch (err) {
                setError(errorText(err));
              }
            }}
          >
            <label>
              Reason to stop <input value={stopReason} onInput={(e) => setStopReason((e.target as HTMLInputElement).value)} />
            </label>{' '}
            <button class="btn" type="submit" disabled={!stopReason.trim()}>
              Stop shadow run
            </button>
            {error && <ErrorBox message={error} />}
          </form>
          <Promote r={r} d={d} summary={cmp.data?.summary ?? null} onDone={onChange} />
        </>
      )}
    </div>
  );
}

export function ComparisonView({ c }: { c: ShadowComparison }) {
  return (
    <div data-testid="shadow-comparison">
      <ul class="small" data-testid="shadow-summary">
        {c.summary.text.map((t) => (
          <li key={t}>{t}</li>
        ))}
      </ul>
      {c.batches.length > 0 && (
        <table class="batch-table" data-testid="shadow-batches">
          <thead>
            <tr>
              <th scope="col">batch</th>
              <th scope="col">alarms deployed / candidate</th>
              <th scope="col">caught by deployed only</th>
              <th scope="col">caught by candidate only</th>
              <th scope="col">endpoint</th>
              <th scope="col">lab: deployed</th>
              <th scope="col">lab: candidate</th>
            </tr>
          </thead>
          <tbody>
            {c.batches.map((b) => (
              <tr key={b.batch}>
                <td>{b.batch}</td>
                <td class="num">
                  {b.deployed.alarms} / {b.candidate.alarms}
                </td>
                <td>{b.onlyDeployed.join(', ') || '—'}</td>
                <td>{b.onlyCandidate.join(', ') || '—'}</td>
                <td class="small">
                  {b.deployed.endpointAt === null && b.candidate.endpointAt === null
                    ? 'called by neither'
                    : b.endpointDifferenceMin !== null
                      ? endpointDifference(b.endpointDifferenceMin)
                      : b.deployed.endpointAt !== null
                        ? 'deployed only'
                        : 'candidate only'}
                </td>
                <td class="small">{labText(b.deployed.lab)}</td>
                <td class="small">{labText(b.candidate.lab)}</td>
              </tr>
            ))}
          </tbody>
        </table>
      )}
      <p class="muted small">{c.method}</p>
    </div>
  );
}

function Promote({ r, d, summary, onDone }: { r: ShadowRun; d: ModelVersionDetail; summary: ShadowComparison['summary'] | null; onDone: () => void }) {
  const [reason, setReason] = useState('');
  const [password, setPassword] = useState('');
  const [passwordError, setPasswordError] = useState<string | null>(null);
  const [error, setError] = useState<string | null>(null);
  const [done, setDone] = useState<string | null>(null);
  const [busy, setBusy] = useState(false);
  if (d.status !== 'approved') return <p class="muted small">Promoting needs an approved version: approve it (signed) first.</p>;
  return (
    <form
      class="panel"
      data-testid="shadow-promote"
      onSubmit={async (e) => {
        e.preventDefault();
        setError(null);
        setPasswordError(null);
        setBusy(true);
        try {
          await api.promoteShadow(r.id, reason.trim(), password || undefined);
          setDone(`Deployed to ${r.unit}: batches started from now on are judged by ${d.name} v${d.version}. The comparison is kept with the signature.`);
          onDone();
        } catch (err) {
          if (err instanceof ApiError && /\/signature-refused$/.test(err.problem.type) && err.status === 401) {
            setPasswordError('The password does not match your account: the signature was refused. Type it again.');
            setPassword('');
          } else setError(errorText(err));
        } finally {
          setBusy(false);
        }
      }}
    >
      <h4>Promote to {r.unit}</h4>
      <p class="small">
        Deploys {d.name} v{d.version} on {r.unit} in place of the version deployed now, signed by you, with the comparison{summary ? ` of ${summary.batches} batch${summary.batches === 1 ? '' : 'es'}` : ''} attached to the signature and the audit trail.
        {summary && summary.batches > 0 ? ` Alarms per batch: deployed ${fixed(summary.deployedAlarmsPerBatch, 2)}, candidate ${fixed(summary.candidateAlarmsPerBatch, 2)}.` : ''}
      </p>
      <label class="block">
        Reason (required) <textarea rows={2} value={reason} onInput={(e) => setReason((e.target as HTMLTextAreaElement).value)} data-testid="promote-reason" />
      </label>
      <label class="block">
        Password (re-enter to sign) <input type="password" autocomplete="current-password" value={password} onInput={(e) => setPassword((e.target as HTMLInputElement).value)} data-testid="promote-password" />
      </label>
      <FieldError text={passwordError ?? undefined} />
      <button class="btn primary" type="submit" disabled={busy || !reason.trim()} data-testid="promote-button">
        Sign and promote
      </button>
      {done && <p role="status">{done}</p>}
      {error && <ErrorBox message={error} />}
      <Advisory />
    </form>
  );
}
