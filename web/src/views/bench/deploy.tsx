/** Version page: deploy an approved version to a unit. */
import { useState } from 'preact/hooks';
import type { ModelVersionDetail } from '../../../../core/api/rest.ts';
import { api } from '../../api/endpoints.ts';
import { errorText } from '../../api/problem.ts';
import { useAsync } from '../../components/use-async.ts';
import { Advisory, ErrorBox } from '../../components/status.tsx';

export function Deploy({ d, onDone }: { d: ModelVersionDetail; onDone: () => void }) {
  const units = useAsync(() => api.units(), []);
  const [unit, setUnit] = useState('');
  const [reason, setReason] = useState('');
  const [error, setError] = useState<string | null>(null);
  const [done, setDone] = useState<string | null>(null);
  return (
    <form
      class="panel"
      data-testid="deploy"
      onSubmit={async (e) => {
        e.preventDefault();
        setError(null);
        try {
          const dep = await api.deploy(unit, d.versionId, reason || undefined);
          setDone(`Deployed to ${dep.unit}; batches started from now on are judged by v${d.version}.`);
          onDone();
        } catch (err) {
          setError(errorText(err));
        }
      }}
    >
      <h3>Deploy to a unit</h3>
      {d.status !== 'approved' && <p class="muted small">Only an approved version can be deployed.</p>}
      <label>
        Unit{' '}
        <select value={unit} onChange={(e) => setUnit((e.target as HTMLSelectElement).value)} required>
          <option value="">choose…</option>
          {units.data?.items.map((u) => (
            <option key={u.id} value={u.id}>
              {u.name} ({u.kind})
            </option>
          ))}
        </select>
      </label>
      <label class="block">
        Reason <input value={reason} onInput={(e) => setReason((e.target as HTMLInputElement).value)} />
      </label>
      <button class="btn" type="submit" disabled={d.status !== 'approved' || !unit}>
        Deploy
      </button>
      {done && <p role="status">{done}</p>}
      {error && <ErrorBox message={error} />}
      <Advisory />
    </form>
  );
}
