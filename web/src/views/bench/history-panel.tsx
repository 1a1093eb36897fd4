/**
 * Model bench builder: the plant-history decomposition of the chosen batches (docs/plant-history-builds.md)
 * — streamed from the database by worker threads, so hundreds of batches fit — with its progress
 * while it runs and, when done, the variance and cross-validation per component.
 */
import { useEffect, useState } from 'preact/hooks';
import type { HistoryJobView } from '../../../../core/api/rest.ts';
import type { ChainSpec } from '../../../../core/preprocess/index.ts';
import { api } from '../../api/endpoints.ts';
import { errorText } from '../../api/problem.ts';
import { ErrorBox } from '../../components/status.tsx';
import { percent, sig } from '../../format/number-format.ts';

const PASS_WORDS = { scatter: 'reading the spectra', 'cross-validation': 'cross-validating by groups of batches' } as const;

export function HistoryPanel({ chosen, chain, components }: { chosen: string[]; chain: ChainSpec | null; components: number | 'auto' }) {
  const [job, setJob] = useState<HistoryJobView | null>(null);
  const [error, setError] = useState<string | null>(null);
  useEffect(() => {
    if (!job || job.status !== 'running') return;
    const t = setTimeout(() => {
      api.historyJob(job.job).then(setJob, (e) => setError(errorText(e)));
    }, 1000);
    return () => clearTimeout(t);
  }, [job]);
  const start = async () => {
    setError(null);
    try {
      setJob(await api.historyPca({ referenceBatches: chosen, components: components === 'auto' ? 10 : components, ...(chain ? { chain } : {}) }));
    } catch (e) {
      setError(errorText(e));
    }
  };
  const p = job?.progress;
  const r = job?.result;
  return (
    <fieldset class="panel" data-testid="history-panel">
      <legend>Plant history: decomposition of many batches</legend>
      <p class="small muted">
        The PCA of the chosen batches streamed from the database by worker threads, one per core: memory is bounded by the wavelengths, not the spectra, so hundreds of batches fit. Cross-validated by groups of
        batches. It shows how many components the history carries; it does not make a version.
      </p>
      <div class="form-row">
        <button type="button" class="btn" disabled={chosen.length < 2 || job?.status === 'running'} onClick={start} data-testid="history-start">
          Decompose the {chosen.length} chosen batches
        </button>
        {chosen.length < 2 && <span class="muted small">Choose at least 2 batches above.</span>}
      </div>
      {error && <ErrorBox message={error} />}
      {job && p && job.status === 'running' && (
        <p data-testid="history-progress">
          <progress max={p.of} value={p.batches} aria-label="batches read" /> {PASS_WORDS[p.pass]}: {p.batches} of {p.of} batches, {p.spectra.toLocaleString('en')} spectra
        </p>
      )}
      {job?.status === 'failed' && <ErrorBox message={`The decomposition failed: ${job.error}`} />}
      {r && (
        <>
          <p class="small" data-testid="history-summary">
            {r.spectra.toLocaleString('en')} spectra × {r.variables} variables from {job!.batches} batches on {r.workers} worker{r.workers === 1 ? '' : 's'} in {sig(r.seconds.total)} s (cross-validation{' '}
            {percent(r.seconds.crossValidation / r.seconds.total)}). Preprocessing: {r.chain}.{r.leastPress !== null &&
              ` Least PRESS at ${r.leastPress} component${r.leastPress === 1 ? '' : 's'}${r.press && r.leastPress === r.press.length ? ' — the most searched: more may describe the history better' : ''}.`}
          </p>
          <table class="batch-table" data-testid="history-table">
            <thead>
              <tr>
                <th scope="col">component</th>
                <th scope="col" class="num">variance</th>
                <th scope="col" class="num">explained</th>
                <th scope="col" class="num">cumulative</th>
                <th scope="col" class="num">PRESS (groups of batches left out)</th>
              </tr>
            </thead>
            <tbody>
              {Array.from({ length: Math.max(r.eigenvalues.length, r.press?.length ?? 0) }, (_, a) => (
                <tr key={a}>
                  <td>PC{a + 1}</td>
                  <td class="num">{a < r.eigenvalues.length ? sig(r.eigenvalues[a]!) : '—'}</td>
                  <td class="num">{a < r.eigenvalues.length ? percent(r.explained[a]!, 1) : '—'}</td>
                  <td class="num">{a < r.eigenvalues.length ? percent(r.cumulative[a]!, 1) : '—'}</td>
                  <td class="num">
                    {r.press && a < r.press.length ? sig(r.press[a]!, 4) : '—'}
                    {r.leastPress === a + 1 && ' ◀ least'}
                  </td>
                </tr>
              ))}
            </tbody>
          </table>
        </>
      )}
    </fieldset>
  );
}
