/**
 * The one storage interface of the Tideline server. The embedded implementation is SQLite
 * (sqlite-storage.ts); a PostgreSQL implementation can follow behind the same interface, so every
 * method returns a Promise even where SQLite answers synchronously.
 *
 * Raw spectra are the record: nothing here changes or deletes them.
 */
import type { Alarm, EndpointEventRecord, EvaluationResult, LabValueRecord, ModelVersionStatus } from '../../core/api/rest.ts';
import type { EndpointState, MonitorResult } from '../../core/monitor/types.ts';
import type { Ne107Category } from '../../core/protocol/ingest-messages.ts';
import type { AuditRepository, AuthRepositories, ModelLifeRepository, SignalRepository, SignatureRepository, SpectrumSourceRef, UnitOfWork, UnitOfWorkRunner } from './repositories.ts';

export interface UnitRow {
  id: string;
  name: string;
  kind: 'dryer' | 'reactor' | 'other';
  description: string;
  createdAt: number;
}

export interface AnalyzerRow {
  id: string;
  name: string;
  createdAt: number;
}

export interface AnalyzerBootRow {
  analyzer: string;
  boot: number;
  axis: Float64Array;
  instrument: string | null;
  firstSeen: number;
  lastSeen: number;
  lastSeq: number;
}

export interface BatchRow {
  id: string;
  unit: string;
  analyzer: string;
  boot: number;
  product: string;
  status: 'open' | 'ended';
  startSeq: number;
  startT: number;
  endSeq: number | null;
  endT: number | null;
  endReason: string | null;
  axis: Float64Array;
  modelVersion: string | null;
  spectrumCount: number;
  lastSeq: number | null;
  lastT: number | null;
  endpointState: EndpointState | null;
  endpointAt: number | null;
  createdAt: number;
}

export interface SpectrumRow {
  batch: string;
  idx: number;
  seq: number;
  t: number;
  values: Float32Array;
}

export interface ModelVersionRow {
  id: string;
  name: string;
  version: number;
  product: string;
  sha256: string;
  body: string;
  settings: Record<string, unknown>;
  referenceBatches: string[];
  components: number;
  confidence: number;
  status: ModelVersionStatus;
  createdAt: number;
  createdBy: string;
  approvedAt: number | null;
  approvedBy: string | null;
  approvalReason: string | null;
  retiredAt: number | null;
  retiredBy: string | null;
  retireReason: string | null;
}

export interface DeploymentRow {
  id: string;
  unit: string;
  modelVersion: string;
  deployedAt: number;
  deployedBy: string;
  reason: string | null;
  endedAt: number | null;
}

/** Stored lab values have exactly the shape the API serves (core/api/rest.ts LabValueRecord). */
export type LabValueRow = LabValueRecord;

/** Stored endpoint events have exactly the shape the API serves. */
export type EndpointEventRow = EndpointEventRecord;

/** One analyzer-status report (NAMUR NE 107), as stored. */
export interface AnalyzerStatusRow {
  analyzer: string;
  boot: number;
  seq: number;
  /** The analyzer's time of the status, ms epoch. */
  t: number;
  status: Ne107Category;
  code: string | null;
  detail: string | null;
  /** The unit it was applied to; null when the analyzer served no unit yet. */
  unit: string | null;
  receivedAt: number;
}

/** A stored stream position that was not a valid seq, and what it was repaired to. */
export interface StreamPositionRepair {
  analyzer: string;
  boot: number;
  /** What was stored (as SQLite held it). */
  was: number | string | null;
  /** The highest valid seq stored for the (analyzer, boot), -1 when none. */
  now: number;
  /** Refused-entry rows of the (analyzer, boot) whose seq is not a valid seq (kept for the record). */
  invalidRejectedRows: number;
}

export interface OutboxRow {
  id: string;
  unit: string;
  unitSeq: number;
  type: string;
  payload: unknown;
  createdAt: number;
}

/** Everything one group commit writes, in one transaction. Order of application: as listed. */
export interface IngestWrite {
  boots: { analyzer: string; boot: number; lastSeq: number; lastSeen: number }[];
  batchStarts: Omit<BatchRow, 'spectrumCount' | 'lastSeq' | 'lastT' | 'endpointState' | 'endpointAt' | 'status' | 'endSeq' | 'endT' | 'endReason'>[];
  rejected: { analyzer: string; boot: number; seq: number; code: string; message: string; receivedAt: number }[];
  spectra: (SpectrumRow & { analyzer: string; boot: number; receivedAt: number })[];
  results: { batch: string; idx: number; modelVersion: string; result: MonitorResult }[];
  batchProgress: { batch: string; spectrumCount: number; lastSeq: number; lastT: number; endpointState: EndpointState | null; endpointAt: number | null }[];
  batchEnds: { batch: string; endSeq: number | null; endT: number; endReason: string | null }[];
  analyzerStatus: AnalyzerStatusRow[];
  alarms: Alarm[];
  endpointEvents: EndpointEventRow[];
  outbox: OutboxRow[];
  /**
   * Lab values of spectra written in this commit (an import's property columns), after the spectra.
   * The caller checks them first (core/lab/lab-values.ts checkLabValueAdditions); the table's own
   * constraints (spectrum exists, a value corrected once, append-only) still hold.
   */
  labValues: LabValueRow[];
  /** Batches a shadow run judges (with their batch start), and the shadow run's results (with their spectra); never signalled (docs/model-life.md). */
  shadowBatches?: { run: string; batch: string }[];
  shadowResults?: { run: string; batch: string; idx: number; result: MonitorResult }[];
}

export function emptyIngestWrite(): IngestWrite {
  return { boots: [], rejected: [], batchStarts: [], spectra: [], results: [], batchProgress: [], batchEnds: [], analyzerStatus: [], alarms: [], endpointEvents: [], outbox: [], labValues: [], shadowBatches: [], shadowResults: [] };
}

export interface BatchFilter {
  unit?: string;
  product?: string;
  status?: 'open' | 'ended';
  from?: number;
  to?: number;
  ids?: string[];
  limit: number;
  offset: number;
}

export interface AlarmFilter {
  unit?: string;
  batch?: string;
  state?: string;
  active?: boolean;
  /** Active, unacknowledged or shelved (what an operator must still see). */
  open?: boolean;
  limit: number;
  offset: number;
}

export interface Storage extends UnitOfWorkRunner, AuthRepositories {
  close(): Promise<void>;

  /** The hash-chained audit trail's records (server/audit seals them; appends only in a unit of work). */
  readonly audit: AuditRepository;
  /** Electronic signatures (written by server/auth in the unit of work of what they sign). */
  readonly signatures: SignatureRepository;
  /** The outbox as the signal channels read it, their delivery bookkeeping and the endpoint latches. */
  readonly signals: SignalRepository;
  /** Shadow runs, stored results for model health, periodic reviews (server/model-life). */
  readonly modelLife: ModelLifeRepository;

  // units, analyzers (their tokens: the analyzerTokens repository)
  createUnit(u: UnitRow): Promise<void>;
  getUnit(id: string): Promise<UnitRow | null>;
  listUnits(): Promise<UnitRow[]>;
  createAnalyzer(a: AnalyzerRow): Promise<void>;
  getAnalyzer(id: string): Promise<AnalyzerRow | null>;
  listAnalyzers(): Promise<AnalyzerRow[]>;
  upsertAnalyzerBoot(row: Omit<AnalyzerBootRow, 'lastSeq'>): Promise<AnalyzerBootRow>;
  getAnalyzerBoot(analyzer: string, boot: number): Promise<AnalyzerBootRow | null>;
  latestAnalyzerBoot(analyzer: string): Promise<AnalyzerBootRow | null>;
  /**
   * Stream positions (analyzer_boots.last_seq) that are not an integer -1 … 2^53 − 1 (an older
   * version could adopt a refused entry's invalid seq): set each to the highest valid seq stored for
   * its (analyzer, boot). Returns what was repaired (empty on a sound database).
   */
  repairStreamPositions(): Promise<StreamPositionRepair[]>;

  /**
   * What is stored under (analyzer, boot, seq): the entry as it was accepted, 'refused' when it was
   * refused and its seq consumed (its content is not kept), or null when nothing is.
   */
  storedEntry(analyzer: string, boot: number, seq: number): Promise<StoredEntry | 'refused' | null>;

  // ingest
  commitIngest(w: IngestWrite): Promise<void>;
  maxOutboxSeqByUnit(): Promise<Map<string, number>>;
  /** The latest analyzer-status report of every analyzer that sent one. */
  latestAnalyzerStatuses(): Promise<AnalyzerStatusRow[]>;
  /** Unit of each analyzer's most recent batch. */
  lastUnitByAnalyzer(): Promise<Map<string, string>>;

  // batches, spectra, results
  getBatch(id: string): Promise<BatchRow | null>;
  batchIds(): Promise<string[]>;
  listBatches(f: BatchFilter): Promise<{ items: BatchRow[]; total: number }>;
  openBatches(): Promise<BatchRow[]>;
  readSpectra(batch: string, fromSeq: number, toSeq: number, limit: number): Promise<SpectrumRow[]>;
  /** The times of a batch's spectra by index (ms epoch), without their values. */
  spectrumTimes(batch: string): Promise<Float64Array>;
  /** Where worker threads read spectra from (their own reader: server/storage/spectrum-reader.ts). */
  spectrumSource(): SpectrumSourceRef;
  /** Every spectrum of a batch in order, as a stream of pages (for replay). */
  iterateSpectra(batch: string, pageSize?: number): AsyncIterable<SpectrumRow>;
  getSpectrumBySeq(batch: string, seq: number): Promise<SpectrumRow | null>;
  readResults(batch: string, fromSeq: number, toSeq: number, limit: number): Promise<MonitorResult[]>;
  lastResult(batch: string): Promise<MonitorResult | null>;
  /** Ids of the batch's results, to know which results are missing after a crash. */
  resultCount(batch: string): Promise<number>;
  /**
   * Per batch: spectra judged suspect (a single point beyond a limit that raised no alarm on its
   * own, MonitorResult.suspect) and spectra refused as too damaged to judge (pixel quality); batches
   * without results are absent.
   */
  scanCounts(batches: string[]): Promise<Map<string, { suspect: number; unjudged: number }>>;

  // models and deployments
  nextModelVersion(name: string): Promise<number>;
  insertModelVersion(m: ModelVersionRow): Promise<void>;
  getModelVersion(id: string): Promise<ModelVersionRow | null>;
  listModelVersions(): Promise<ModelVersionRow[]>;
  approveModelVersion(id: string, by: string, at: number, reason: string): Promise<void>;
  retireModelVersion(id: string, by: string, at: number, reason: string): Promise<void>;
  insertEvaluation(e: EvaluationResult): Promise<void>;
  listEvaluations(versionId: string): Promise<EvaluationResult[]>;
  deploy(d: DeploymentRow): Promise<void>;
  activeDeployment(unit: string): Promise<DeploymentRow | null>;
  listDeployments(f: { unit?: string; active?: boolean }): Promise<DeploymentRow[]>;
  endDeploymentsOfModel(versionId: string, at: number): Promise<void>;

  // alarms, endpoint events
  listAlarms(f: AlarmFilter): Promise<{ items: Alarm[]; total: number }>;
  getAlarm(id: string): Promise<Alarm | null>;
  /** Alarms not in state 'normal' (for rebuilding the alarm book at start). */
  liveAlarms(): Promise<Alarm[]>;
  listEndpointEvents(batch: string): Promise<EndpointEventRow[]>;

  // laboratory values (append-only; core/lab/lab-values.ts has the rules)
  /**
   * Add lab values in one transaction, checked against the stored ones (never overwriting: a value
   * on a spectrum that has one is refused unless it supersedes it; a correction needs a reason).
   * Throws LabValueError. `within` runs in the same unit of work after the rows are written (the
   * audit records): if it throws, nothing is stored.
   */
  addLabValues(rows: LabValueRow[], within?: (rows: LabValueRow[], uow: UnitOfWork) => Promise<void>): Promise<void>;
  /** Every lab value of a batch, oldest first (corrections after what they correct). */
  listLabValues(batch: string): Promise<LabValueRow[]>;

  // shadow runs (docs/model-life.md; the rest of their store is the modelLife repository)
  /** The active shadow run of each unit that has one. */
  activeShadowRuns(): Promise<{ id: string; unit: string; modelVersion: string }[]>;
  /** The shadow run that judges a batch, with its version; null when none. */
  shadowRunOfBatch(batch: string): Promise<{ id: string; modelVersion: string } | null>;
}

/** An accepted log entry as stored, to compare a resend of the same (analyzer, boot, seq) with. */
export type StoredEntry =
  | { type: 'spectrum'; t: number; values: Float32Array }
  | { type: 'batch-start'; t: number; unit: string; batch: string; product: string }
  | { type: 'batch-end'; t: number; batch: string; reason: string | null }
  | { type: 'analyzer-status'; t: number; status: string; code: string | null; detail: string | null };
