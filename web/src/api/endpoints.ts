/** Every REST call the dashboard makes, in one place (paths and shapes from core/api/rest.ts). */
import type {
  AlarmGroupAcknowledgement,
  HistoryJobView,
  Alarm,
  BatchDetail,
  BatchSummary,
  BuildModelRequest,
  ContributionsResponse,
  Deployment,
  EvaluationResult,
  ModelEnvelopeView,
  ModelReferencesView,
  ModelSummary,
  ModelVersionDetail,
  ModelVersionSummary,
  Page,
  ResultsRange,
  ServerInfo,
  SpectraRange,
  UnitSummary,
} from '../../../core/api/rest.ts';
import type { ModelHealth, ShadowComparison, ShadowRun, ShadowRunList } from '../../../core/api/model-life.ts';
import { get, post, query } from './http.ts';

const enc = encodeURIComponent;

export const api = {
  info: () => get<ServerInfo>('/api/info'),
  units: () => get<Page<UnitSummary>>('/api/units'),
  unit: (id: string) => get<UnitSummary>(`/api/units/${enc(id)}`),
  batches: (f: { unit?: string; product?: string; status?: 'open' | 'ended'; limit?: number; offset?: number } = {}) =>
    get<Page<BatchSummary>>(`/api/batches${query(f)}`),
  batch: (id: string) => get<BatchDetail>(`/api/batches/${enc(id)}`),
  spectra: (id: string, f: { fromSeq?: number; toSeq?: number; limit?: number } = {}) => get<SpectraRange>(`/api/batches/${enc(id)}/spectra${query(f)}`),
  results: (id: string, f: { fromSeq?: number; toSeq?: number; limit?: number } = {}) => get<ResultsRange>(`/api/batches/${enc(id)}/results${query(f)}`),
  contributions: (id: string, seq: number) => get<ContributionsResponse>(`/api/batches/${enc(id)}/contributions${query({ seq })}`),
  exportCsvUrl: (id: string, what: 'spectra' | 'results') => `/api/batches/${enc(id)}/export.csv${query({ what })}`,
  models: () => get<Page<ModelSummary>>('/api/models'),
  modelVersion: (v: string) => get<ModelVersionDetail>(`/api/models/versions/${enc(v)}`),
  envelope: (v: string) => get<ModelEnvelopeView>(`/api/models/versions/${enc(v)}/envelope`),
  references: (v: string) => get<ModelReferencesView>(`/api/models/versions/${enc(v)}/references`),
  build: (req: BuildModelRequest) => post<ModelVersionSummary>('/api/models/build', req),
  historyPca: (req: { referenceBatches: string[]; components: number; groups?: number; chain?: unknown[] }) => post<HistoryJobView>('/api/models/history-pca', req),
  historyJob: (job: string) => get<HistoryJobView>(`/api/models/history-pca/${enc(job)}`),
  evaluate: (v: string, batches: string[], faulty: string[] = []) => post<EvaluationResult>(`/api/models/versions/${enc(v)}/evaluate`, { batches, ...(faulty.length ? { faulty } : {}) }),
  approve: (v: string, reason: string, password?: string, earlyEndpointOverride?: string, evidenceOverride?: string, reviewIntervalDays?: number) =>
    post<ModelVersionSummary>(`/api/models/versions/${enc(v)}/approve`, {
      reason,
      password,
      ...(earlyEndpointOverride !== undefined ? { earlyEndpointOverride } : {}),
      ...(evidenceOverride !== undefined ? { evidenceOverride } : {}),
      ...(reviewIntervalDays !== undefined ? { reviewIntervalDays } : {}),
    }),
  health: (v: string) => get<ModelHealth>(`/api/models/versions/${enc(v)}/health`),
  shadowRuns: (f: { unit?: string; versionId?: string; active?: boolean } = {}) => get<ShadowRunList>(`/api/shadow-runs${query(f)}`),
  startShadow: (unit: string, versionId: string, reason: string) => post<ShadowRun>('/api/shadow-runs', { unit, versionId, reason }),
  stopShadow: (run: string, reason: string) => post<ShadowRun>(`/api/shadow-runs/${enc(run)}/stop`, { reason }),
  shadowComparison: (run: string) => get<ShadowComparison>(`/api/shadow-runs/${enc(run)}/comparison`),
  promoteShadow: (run: string, reason: string, password?: string, confirmEndpointLoss?: string) =>
    post<Deployment>(`/api/shadow-runs/${enc(run)}/promote`, { reason, password, ...(confirmEndpointLoss !== undefined ? { confirmEndpointLoss } : {}) }),
  deployments: (f: { unit?: string; active?: boolean } = {}) => get<Page<Deployment>>(`/api/deployments${query(f)}`),
  deploy: (unit: string, versionId: string, reason?: string) => post<Deployment>('/api/deployments', { unit, versionId, reason }),
  alarms: (f: { unit?: string; batch?: string; state?: string; active?: boolean; limit?: number; offset?: number } = {}) =>
    get<Page<Alarm>>(`/api/alarms${query(f)}`),
  acknowledge: (id: string, comment?: string) => post<Alarm>(`/api/alarms/${enc(id)}/acknowledge`, { comment }),
  /** One action for a group (one audit entry listing them); each alarm's life cycle moves as for one. */
  acknowledgeGroup: (ids: string[], comment?: string) => post<AlarmGroupAcknowledgement>('/api/alarms/acknowledge', { alarms: ids, comment }),
  shelve: (id: string, minutes: number, reason: string) => post<Alarm>(`/api/alarms/${enc(id)}/shelve`, { minutes, reason }),
  unshelve: (id: string) => post<Alarm>(`/api/alarms/${enc(id)}/unshelve`),
};
