/**
 * Version page: deploy an approved version to a unit. Before anything is sent, the server's preview
 * (GET /api/deployments/preview) says whether the version can judge the unit's batches (analyzer
 * axis, product, unit kind — refused otherwise, naming both sides) and what changes against the
 * version deployed there now; a deployment that drops the endpoint property needs a reason, signed
 * with the deployment (electronic signature: the password is re-entered).
 */
import { useState } from 'preact/hooks';
import type { ModelVersionDetail } from '../../../../core/api/rest.ts';
import { api } from '../../api/endpoints.ts';
import { get, post } from '../../api/http.ts';
import { ApiError, errorText } from '../../api/problem.ts';
import { useAsync } from '../../components/use-async.ts';
import { Advisory, ErrorBox, Loading } from '../../components/status.tsx';
import { FieldError } from './field-error.tsx';
import { deployPreviewOf, type DeployPreviewView } from './deploy-data.ts';

/** The preview, or null on a server without the preview route (it then deploys without one). */
async function previewOf(unit: string, versionId: string): Promise<DeployPreviewView | null> {
  try {
    return deployPreviewOf(await get<unknown>(`/api/deployments/preview?unit=${encodeURIComponent(unit)}&versionId=${encodeURIComponent(versionId)}`));
  } catch (e) {
    if (e instanceof ApiError && e.status === 404 && /no API route/.test(e.problem.detail ?? '')) return null;
    throw e;
  }
}

export function Deploy({ d, onDone }: { d: ModelVersionDetail; onDone: () => void }) {
  const units = useAsync(() => api.units(), []);
  const [unit, setUnit] = useState('');
  const [reason, setReason] = useState('');
  const [lossReason, setLossReason] = useState('');
  const [password, setPassword] = useState('');
  const [errors, setErrors] = useState<Record<string, string>>({});
  const [done, setDone] = useState<string | null>(null);
  const [busy, setBusy] = useState(false);
  const preview = useAsync(() => (unit ? previewOf(unit, d.versionId) : Promise.resolve(null)), [unit, d.versionId]);
  const p = unit ? preview.data : null;
  const misfit = !!p && p.mismatches.length > 0;
  const needsLoss = !!p && !misfit && p.needsEndpointLossConfirmation;
  const approved = d.status === 'approved';

  const submit = async (e: Event) => {
    e.preventDefault();
    setDone(null);
    if (needsLoss && (!lossReason.trim() || !password)) {
      setErrors({
        ...(!lossReason.trim() ? { confirmEndpointLoss: 'This deployment drops the endpoint property: say why, or choose a version that keeps it.' } : {}),
        ...(!password ? { password: 'Dropping the endpoint property is signed: re-enter your password.' } : {}),
      });
      return;
    }
    setErrors({});
    setBusy(true);
    try {
      const body = { unit, versionId: d.versionId, ...(reason.trim() ? { reason: reason.trim() } : {}), ...(needsLoss ? { confirmEndpointLoss: lossReason.trim(), password } : {}) };
      const dep = await post<{ unit: string }>('/api/deployments', body);
      setDone(`Deployed to ${dep.unit}${needsLoss ? ', signed with your reason for dropping the endpoint property' : ''}; batches started from now on are judged by ${d.name} v${d.version}.`);
      setPassword('');
      onDone();
      preview.reload();
    } catch (err) {
      const f: Record<string, string> = {};
      if (err instanceof ApiError) {
        for (const x of err.problem.errors ?? []) if (x.path === 'confirmEndpointLoss' || x.path === 'password') f[x.path] = x.message;
        // a refused password is said beside the password field; the typed reason stays
        if (err.status === 401 && f.password) f.password = 'The password does not match your account: the signature was refused (the attempt is kept in the audit trail) and nothing was deployed. Type it again; the rest of the form is kept.';
        else f.form = err.message;
      } else f.form = errorText(err);
      setErrors(f);
      preview.reload();
    } finally {
      setBusy(false);
    }
  };

  return (
    <form class="panel" data-testid="deploy" onSubmit={submit}>
      <h3>Deploy to a unit</h3>
      {!approved && <p class="muted small">Only an approved version can be deployed.</p>}
      <label>
        Unit{' '}
        <select value={unit} onChange={(e) => (setUnit((e.target as HTMLSelectElement).value), setDone(null), setErrors({}))} required>
          <option value="">choose…</option>
          {units.data?.items.map((u) => (
            <option key={u.id} value={u.id}>
              {u.name} ({u.kind})
            </option>
          ))}
        </select>
      </label>
      {unit && preview.loading && !preview.data && <Loading what="what the deployment changes" />}
      {unit && preview.error && <ErrorBox message={`What the deployment would change is not known: ${preview.error}`} onRetry={preview.reload} />}
      {p && <PreviewView p={p} />}
      {needsLoss && (
        <>
          <label class="block">
            Reason for dropping the endpoint property (signed with the deployment and kept in the audit trail){' '}
            <textarea rows={2} cols={50} value={lossReason} onInput={(e) => setLossReason((e.target as HTMLTextAreaElement).value)} data-testid="endpoint-loss-reason" />
          </label>
          <FieldError text={errors.confirmEndpointLoss} />
          <label class="block">
            Password (re-enter to sign: this deployment is an electronic signature, meaning "deployed", with the reason above){' '}
            <input type="password" autocomplete="current-password" value={password} onInput={(e) => setPassword((e.target as HTMLInputElement).value)} data-testid="endpoint-loss-password" />
          </label>
          <FieldError text={errors.password} />
        </>
      )}
      <label class="block">
        Reason <input value={reason} onInput={(e) => setReason((e.target as HTMLInputElement).value)} />
      </label>
      <button class="btn" type="submit" disabled={!approved || !unit || misfit || busy || (unit !== '' && preview.loading && !preview.data)} data-testid="deploy-button">
        {misfit ? 'Cannot deploy to this unit' : needsLoss ? 'Sign and deploy, dropping the endpoint property' : 'Deploy'}
      </button>
      {done && <p role="status">{done}</p>}
      {errors.form && <ErrorBox message={errors.form} />}
      <Advisory />
    </form>
  );
}

function PreviewView({ p }: { p: DeployPreviewView }) {
  return (
    <div class="deploy-preview" data-testid="deploy-preview">
      {p.mismatches.length > 0 && (
        <div class="state state-error" role="alert" data-testid="deploy-mismatch">
          <strong>■ This version cannot judge the batches of {p.unit}:</strong>
          <ul>
            {p.mismatches.map((m, i) => (
              <li key={i}>
                {m.what === 'axis' ? 'Analyzer axis' : m.what === 'product' ? 'Product' : 'Kind of unit'}: {m.text}
              </li>
            ))}
          </ul>
          Nothing will be deployed. Build a version from reference batches of this unit's product and analyzer.
        </div>
      )}
      {p.mismatches.length === 0 && (
        <>
          <p class="small">
            {p.replaces ? (
              <>
                Replaces <b>{p.replaces.name} v{p.replaces.version}</b>, deployed on {p.unit} now.
              </>
            ) : (
              <>Nothing is deployed on {p.unit} now.</>
            )}
          </p>
          {p.warnings.map((w, i) => (
            <p key={i} class={`small ${p.dropsEndpointProperty ? 'field-error' : ''}`} role={p.dropsEndpointProperty ? 'alert' : undefined} data-testid="deploy-warning">
              {p.dropsEndpointProperty && <span aria-hidden="true">▲ </span>}
              {w}
            </p>
          ))}
          {p.replaces && p.changes.length === 0 && <p class="muted small">Nothing the monitoring uses changes.</p>}
          {p.changes.length > 0 && (
            <table class="batch-table" data-testid="deploy-changes">
              <thead>
                <tr>
                  <th scope="col">what changes</th>
                  <th scope="col">deployed now</th>
                  <th scope="col">after this deployment</th>
                </tr>
              </thead>
              <tbody>
                {p.changes.map((c) => (
                  <tr key={c.what}>
                    <td>{c.what}</td>
                    <td class="small">{c.before ?? 'none'}</td>
                    <td class="small">{c.after ?? <strong>none</strong>}</td>
                  </tr>
                ))}
              </tbody>
            </table>
          )}
        </>
      )}
    </div>
  );
}
