/** Model bench: the models and their versions, and the status badge of a version. */
import { api } from '../../api/endpoints.ts';
import { useAsync } from '../../components/use-async.ts';
import { Badge, ErrorBox, Loading } from '../../components/status.tsx';
import { href } from '../../router.ts';

export function ModelList({ current }: { current: string | null }) {
  const models = useAsync(() => api.models(), []);
  return (
    <div class="panel">
      <h2>Models</h2>
      {models.loading && !models.data && <Loading what="models" />}
      {models.error && <ErrorBox message={models.error} onRetry={models.reload} />}
      {models.data && models.data.items.length === 0 && <p class="muted">No models yet. Build the first from reference batches.</p>}
      <ul class="model-list">
        {models.data?.items.map((m) => (
          <li key={m.name}>
            <b>{m.name}</b> <span class="muted">{m.product}</span>
            <ul>
              {m.versions.map((v) => (
                <li key={v.versionId} class={v.versionId === current ? 'current' : ''}>
                  <a href={href({ view: 'bench', version: v.versionId })}>
                    v{v.version} <StatusBadge status={v.status} />
                    {v.deployedTo.length > 0 && <span class="muted small"> on {v.deployedTo.join(', ')}</span>}
                  </a>
                </li>
              ))}
            </ul>
          </li>
        ))}
      </ul>
    </div>
  );
}

export function StatusBadge({ status }: { status: 'draft' | 'approved' | 'retired' }) {
  return <Badge tone={status === 'approved' ? 'ok' : status === 'draft' ? 'info' : 'muted'}>{status}</Badge>;
}
