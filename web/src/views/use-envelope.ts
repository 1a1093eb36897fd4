/**
 * A model version's golden envelope, and the same with its reference batches' paths once they have
 * come: the server answers the envelope at once and replays the reference batches for the paths
 * (GET …/references), so the charts draw the band first and add the paths when they arrive.
 */
import { useMemo } from 'preact/hooks';
import type { ModelEnvelopeView } from '../../../core/api/rest.ts';
import { api } from '../api/endpoints.ts';
import { useAsync, type Async } from '../components/use-async.ts';

export function useEnvelope(version: string | null): { env: Async<ModelEnvelopeView | null>; withReferences: ModelEnvelopeView | null } {
  const env = useAsync(() => (version ? api.envelope(version) : Promise.resolve(null)), [version]);
  const refs = useAsync(() => (version ? api.references(version) : Promise.resolve(null)), [version]);
  const withReferences = useMemo(() => (env.data && refs.data ? { ...env.data, references: refs.data.references } : env.data), [env.data, refs.data]);
  return { env, withReferences };
}
