/**
 * Tideline REST API, version 1 — the JSON shapes the server returns and accepts.
 *
 * Types only (no I/O). The server (server/) produces these; the dashboard (web/) reads them.
 * Rule for changes: add fields, never rename or remove them.
 *
 * Base path `/api`. Times are ms since the Unix epoch (UTC). Errors are RFC 9457 problem details
 * (`application/problem+json`, see {@link Problem}). The OpenAPI document is at `/api/openapi.json`.
 *
 * | method | path                                              | returns                      |
 * | ------ | ------------------------------------------------- | ---------------------------- |
 * | GET    | /api/info                                         | ServerInfo                   |
 * | GET    | /api/units                                        | Page<UnitSummary>            |
 * | GET    | /api/units/:unit                                  | UnitSummary                  |
 * | POST   | /api/units                                        | UnitSummary (CreateUnitRequest) |
 * | GET    | /api/analyzers                                    | Page<AnalyzerSummary>        |
 * | POST   | /api/analyzers                                    | CreateAnalyzerResponse (CreateAnalyzerRequest) |
 * | GET    | /api/batches?unit=&product=&status=&from=&to=&limit=&offset= | Page<BatchSummary> |
 * | GET    | /api/batches/:batch                               | BatchDetail                  |
 * | GET    | /api/batches/:batch/spectra?fromSeq=&toSeq=&limit= | SpectraRange                |
 * | GET    | /api/batches/:batch/results?fromSeq=&toSeq=&limit= | ResultsRange                |
 * | GET    | /api/batches/:batch/contributions?seq=            | ContributionsResponse        |
 * | GET    | /api/batches/:batch/export.csv?what=spectra|results | text/csv                   |
 * | GET    | /api/models                                       | Page<ModelSummary>           |
 * | GET    | /api/models/versions/:version                     | ModelVersionDetail           |
 * | GET    | /api/models/versions/:version/envelope            | ModelEnvelopeView            |
 * | POST   | /api/models/build                                 | ModelVersionSummary (BuildModelRequest) |
 * | POST   | /api/models/versions/:version/evaluate            | EvaluationResult (EvaluateModelRequest) |
 * | POST   | /api/models/versions/:version/approve             | ModelVersionSummary (ApproveModelRequest) |
 * | POST   | /api/models/versions/:version/retire              | ModelVersionSummary (RetireModelRequest) |
 * | GET    | /api/deployments?unit=&active=                    | Page<Deployment>             |
 * | POST   | /api/deployments                                  | Deployment (DeployModelRequest) |
 * | GET    | /api/alarms?unit=&batch=&state=&active=&limit=&offset= | Page<Alarm>             |
 * | POST   | /api/alarms/:alarm/acknowledge                    | Alarm (AcknowledgeAlarmRequest) |
 * | POST   | /api/alarms/acknowledge                           | AlarmGroupAcknowledgement (AcknowledgeAlarmsRequest) |
 * | POST   | /api/alarms/:alarm/shelve                         | Alarm (ShelveAlarmRequest)   |
 * | POST   | /api/alarms/:alarm/unshelve                       | Alarm                        |
 * | GET    | /api/batches/:batch/endpoint-events               | Page<EndpointEventRecord>    |
 * | GET    | /api/batches/:batch/lab-values                    | BatchLabValues               |
 * | POST   | /api/batches/:batch/lab-values                    | LabValueView (AddLabValueRequest) |
 */
import type {
  AlarmKind,
  AlarmPriority,
  AlarmState,
  Contributions,
  EndpointState,
  EndpointStatus,
  MonitorResult,
} from '../monitor/types.ts';
import type { SuppressionReason } from '../alarms/types.ts';
import type { BatchEndStatement } from '../monitor/batch-end.ts';
import type { BatchSuspectReason } from '../monitor/batch-suspect.ts';
import type { Ne107Category } from '../protocol/ingest-messages.ts';

export const API_VERSION = 1;
export const API_BASE = '/api';

// ---- common ----------------------------------------------------------------------------------

/** RFC 9457 problem details. `type` is a URI naming the problem kind (relative, under /problems/). */
export interface Problem {
  type: string;
  title: string;
  status: number;
  /** Human-readable explanation of this occurrence, naming what is wrong. */
  detail?: string;
  instance?: string;
  /** Validation problems, one per offending field (zod path joined with '.'). */
  errors?: { path: string; message: string }[];
}

export interface Page<T> {
  items: T[];
  /** Number of items matching the filter (ignoring limit/offset). */
  total: number;
  limit: number;
  offset: number;
}

export interface ServerInfo {
  name: 'tideline';
  version: string;
  apiVersion: typeof API_VERSION;
  ingestProtocol: number;
  liveProtocol: number;
  serverTime: number;
  startedAt: number;
  /** The advisory notice to show wherever endpoints and alarms are configured or shown. */
  advisory: string;
  /** Set when this server is fed by the demo's simulator: say so wherever its data are shown. Null (or absent) for real data. */
  simulation?: SimulationInfo | null;
}

/** The demo marks itself: its units' batches are simulated and replayed faster than real time. */
export interface SimulationInfo {
  /** The units fed by simulated analyzers, each with its replay speed-up (×N real time). */
  units: { unit: string; speedUp: number }[];
  /** One sentence to show with the data. */
  note: string;
}

/** A model version as referred to from elsewhere. */
export interface ModelRef {
  /** Model version id (immutable). */
  versionId: string;
  /** Model (lineage) name, e.g. 'dryer-granule-A'. */
  name: string;
  version: number;
  sha256: string;
}

// ---- units and analyzers ----------------------------------------------------------------------

export type UnitKind = 'dryer' | 'reactor' | 'other';

/**
 * What a unit is doing now.
 * - idle: no open batch.
 * - running: open batch, data arriving.
 * - stale: open batch, but the analyzer has been silent longer than the stale limit.
 * - offline: open batch and the analyzer is not connected.
 */
export type UnitStatusKind = 'idle' | 'running' | 'stale' | 'offline';

export interface OpenBatchRef {
  id: string;
  product: string;
  startedAt: number;
  lastSeq: number | null;
  lastT: number | null;
  spectrumCount: number;
  /** Spectra so far judged suspect: single points beyond a limit that raised no alarm on their own. */
  suspectCount?: number;
  /** Spectra so far refused as too damaged to judge (pixel quality, docs/bad-pixels.md). */
  unjudgedCount?: number;
}

export interface UnitSummary {
  id: string;
  name: string;
  kind: UnitKind;
  description: string;
  createdAt: number;
  status: UnitStatusKind;
  /** Analyzer currently feeding this unit (last batch-start), if any. */
  analyzer: string | null;
  analyzerConnected: boolean;
  /** Model deployed to the unit now; batches started now are judged by it. */
  deployment: ModelRef | null;
  openBatch: OpenBatchRef | null;
  /** Endpoint state of the open batch; null without open batch or model. */
  endpoint: EndpointStatus | null;
  activeAlarms: number;
  unacknowledgedAlarms: number;
  /** Highest priority (1 = highest) among active alarms, null when none. */
  highestPriority: AlarmPriority | null;
  /** ms since the last data from the open batch's analyzer; null when not applicable. */
  silentForMs: number | null;
  /** The analyzer's latest NAMUR NE 107 status report (message `analyzer-status`); null when it sent none. */
  analyzerStatus: AnalyzerStatusView | null;
  /** Why the unit's alarms are suppressed now (ISA-18.2 designed suppression); empty when they are not. */
  suppression: SuppressionReason[];
}

/** An analyzer's NE 107 status as the server last received it. */
export interface AnalyzerStatusView {
  analyzer: string;
  status: Ne107Category;
  code: string | null;
  detail: string | null;
  /** The analyzer's time of the status, ms epoch. */
  t: number;
  receivedAt: number;
}

export interface CreateUnitRequest {
  id: string;
  name?: string;
  kind?: UnitKind;
  description?: string;
}

export interface AnalyzerSummary {
  id: string;
  name: string;
  createdAt: number;
  connected: boolean;
  /** Current or last boot epoch seen in hello. */
  boot: number | null;
  lastSeenAt: number | null;
  instrument: string | null;
  axisPoints: number | null;
  /** First and last wavelength of the hello axis, nm. */
  axisRange: [number, number] | null;
  /** Highest contiguous persisted seq of the current boot; -1 when none. */
  lastSeq: number | null;
  remoteAddress: string | null;
}

export interface CreateAnalyzerRequest {
  id: string;
  name?: string;
}

/** The token is shown once, here; the server keeps only its hash. */
export interface CreateAnalyzerResponse {
  analyzer: AnalyzerSummary;
  token: string;
}

// ---- batches ----------------------------------------------------------------------------------

export type BatchStatus = 'open' | 'ended';

export interface BatchSummary {
  id: string;
  unit: string;
  product: string;
  analyzer: string;
  status: BatchStatus;
  startedAt: number;
  endedAt: number | null;
  /**
   * How the batch ended, in words that agree with its endpoint record (core/monitor/batch-end.ts):
   * "stopped by the control system, after the endpoint was reached" only when it was; null while
   * the batch runs. The analyzer's own words are in reportedEndReason.
   */
  endReason: string | null;
  /** The end reason as the analyzer sent it with batch-end, verbatim (kept in the record); null when it sent none. */
  reportedEndReason?: string | null;
  /** The end and the endpoint together, with a disagreement named where the reported reason claims an endpoint the record lacks. */
  end?: BatchEndStatement | null;
  spectrumCount: number;
  firstSeq: number | null;
  lastSeq: number | null;
  lastT: number | null;
  /** Model version that judged this batch (deployed at batch start); null when none was deployed. */
  model: ModelRef | null;
  endpointState: EndpointState | null;
  /** Time the endpoint was reached (state 'done'), null if not reached. */
  endpointAt: number | null;
  alarmCount: number;
  activeAlarms: number;
  /**
   * Why this batch may not be a good batch (core/monitor/batch-suspect.ts): alarms raised, endpoint
   * not reached, an abnormal reported end; empty when its record shows none. For the batch pickers.
   */
  suspect?: BatchSuspectReason[];
  /** Suspect scans: single spectra beyond a limit that raised no alarm on their own (MonitorResult.suspect); absent where not counted. */
  suspectCount?: number;
  /** Spectra stored but not judged, too damaged (pixel quality, docs/bad-pixels.md); absent where not counted. */
  unjudgedCount?: number;
}

export interface BatchDetail extends BatchSummary {
  /** Wavelength axis of the analyzer when the batch started, nm. */
  axis: number[];
  latestResult: MonitorResult | null;
  endpoint: EndpointStatus | null;
  endpointEvents: EndpointEventRecord[];
  alarms: Alarm[];
  /** The batch's laboratory values, every one ever entered (corrected ones too, marked), oldest first. */
  labValues: LabValueView[];
}

// ---- laboratory values ------------------------------------------------------------------------

/** Where a lab value came from: a column of an imported spectra file, or entered later (REST, CLI, Review). */
export type LabValueSource = 'import' | 'entry';

/**
 * One laboratory (reference-method) value of a batch, as stored. Append-only: a value is never
 * changed; a correction is a new value that `supersedes` it, with a `reason`.
 */
export interface LabValueRecord {
  id: string;
  batch: string;
  /** Normalised property name, e.g. `moisture`. */
  property: string;
  value: number;
  /** e.g. `% w/w`; '' when the property has no unit. */
  unit: string;
  /** When the sample was taken, ms epoch. */
  sampleT: number;
  /** Index (0-based) of the batch's spectrum nearest the sample time. */
  spectrumIdx: number;
  /** |sampleT − that spectrum's time|, ms. */
  spectrumDtMs: number;
  /** Reference method, e.g. `LOD`; null when not given. */
  method: string | null;
  enteredBy: string;
  enteredAt: number;
  source: LabValueSource;
  /** Id of the earlier value this one corrects, or null. */
  supersedes: string | null;
  /** Why (required for a correction). */
  reason: string | null;
}

export interface LabValueView extends LabValueRecord {
  /** Time of the matched spectrum, ms epoch. */
  spectrumT: number;
  /** Sample time in minutes after the batch start. */
  elapsedMin: number;
  /** The value in force: not superseded by a later correction. */
  effective: boolean;
  /** Id of the correction that superseded this value, or null. */
  supersededBy: string | null;
}

/** Answer of GET /api/batches/:batch/lab-values. */
export interface BatchLabValues {
  batch: string;
  /** Longest allowed distance between a sample time and its spectrum, ms (configuration lab.matchToleranceMs). */
  matchToleranceMs: number;
  /** Every value ever entered, oldest first (see LabValueView.effective). */
  items: LabValueView[];
  /** Per property: its unit and the number of effective values. */
  properties: { name: string; unit: string; values: number }[];
}

/**
 * Body of POST /api/batches/:batch/lab-values. The sample time is given once: `sampleT` (ms epoch
 * or ISO 8601) or `elapsedMin` (minutes after the batch start).
 */
export interface AddLabValueRequest {
  property: string;
  value: number;
  unit: string;
  sampleT?: number | string;
  elapsedMin?: number;
  method?: string;
  /** Id of the value this one corrects; needs `reason`. */
  supersedes?: string;
  reason?: string;
}

export interface SpectrumRecord {
  seq: number;
  t: number;
  /** Raw values as received (Float32 precision), on BatchDetail.axis. */
  values: number[];
}

export interface SpectraRange {
  batch: string;
  axis: number[];
  items: SpectrumRecord[];
  /** seq to pass as fromSeq for the next page, null when complete. */
  nextSeq: number | null;
}

/** One stored monitor result. `events` are kept. */
export type ResultRecord = MonitorResult;

export interface ResultsRange {
  batch: string;
  model: ModelRef | null;
  items: ResultRecord[];
  nextSeq: number | null;
}

export interface ContributionsResponse {
  batch: string;
  seq: number;
  t: number;
  model: ModelRef;
  contributions: Contributions;
}

export interface EndpointEventRecord {
  id: string;
  unit: string;
  batch: string;
  from: EndpointState;
  to: EndpointState;
  t: number;
  seq: number;
  reason: string;
  recordedAt: number;
}

// ---- models -----------------------------------------------------------------------------------

export type ModelVersionStatus = 'draft' | 'approved' | 'retired';

export interface ModelVersionSummary extends ModelRef {
  product: string;
  status: ModelVersionStatus;
  createdAt: number;
  createdBy: string;
  approvedAt: number | null;
  approvedBy: string | null;
  approvalReason: string | null;
  retiredAt: number | null;
  retiredBy: string | null;
  retireReason: string | null;
  referenceBatches: string[];
  components: number;
  confidence: number;
  /** Units this version is deployed to now. */
  deployedTo: string[];
  /** Electronic signatures on this version (approval, retirement), oldest first; show them with the model. */
  signatures?: ModelSignature[];
}

/** An electronic signature on a model version: re-entered password + reason, bound to the model hash. */
export interface ModelSignature {
  signer: string;
  signerFullName: string;
  signerRole: string;
  meaning: 'approved' | 'retired' | 'deployed';
  /** The sha256 of the model file the signature is bound to. */
  modelSha256: string;
  reason: string;
  /** An override signed with it (e.g. approving an endpoint rule that reached done early on reference batches), or null. */
  override: string | null;
  signedAt: number;
  /** seq of the signature's audit trail record. */
  auditSeq: number;
}

export interface ModelSummary {
  name: string;
  product: string;
  versions: ModelVersionSummary[];
}

export interface ModelVersionDetail extends ModelVersionSummary {
  /** The build settings as given (BuildSettings of core/model/monitoring-model.ts). */
  settings: Record<string, unknown>;
  explained: number[];
  cumulative: number[];
  /**
   * How the PCA component count was chosen: the count, the rule and what it found (settings
   * components 'auto'), the largest count searched and whether the choice sits there (absent from
   * servers before it was shown; rule null for a count fixed by the model owner).
   */
  pca?: { components: number; chosenBy: 'auto' | 'fixed'; rule: string | null; searched: number; atSearchLimit: boolean; press: number[] };
  /** qMethod: the method id, followed by why when the build fell back from the method asked for (e.g. Box where Jackson–Mudholkar is undefined). */
  limits: { t2: number; q: number; combined: number | null; confidence: number; t2Method: string; qMethod: string };
  /** The limits that raise alarms when the model has them above `limits` (settings.alarms.confidence), else null. */
  alarmLimits: { t2: number; q: number; combined: number; confidence: number; envelopeK: number; envelopeKMethod: string } | null;
  /** Model variable axis after preprocessing, nm. */
  modelAxis: number[];
  evaluations: EvaluationResult[];
  /** What the build decided on its own that the model owner should know (e.g. the Box fallback of the Q limit). */
  notes: string[];
  /** The endpoint rule as resolved at build: every threshold with how it was obtained (null: model not loadable here). */
  endpoint: EndpointRuleView | null;
  /** The property (PLS) model's evidence, or null when the model has none. */
  property: PropertyModelView | null;
  /** The known endpoint of each reference batch that has one, and how it was found (docs/model-building.md). */
  referenceEndpoints: ReferenceEndpointView[];
  /** The endpoint rule replayed leave-one-batch-out on the reference batches (null in models built before it). */
  endpointCheck: EndpointCheckView | null;
  /** The calibration transfer onto a new analyzer this version carries, with its judgement on held-out transfer sets (null: none). */
  transfer?: CalibrationTransferView | null;
}

/** One criterion of a resolved endpoint rule, in words and numbers. */
export interface EndpointCriterionView {
  kind: 'property' | 'mbsd' | 'plateau' | 'golden-end';
  /** e.g. "predicted moisture ≤ 1.995 % w/w (target 2 − margin 0.005)". */
  text: string;
  /** The threshold the live value is compared with (property: target ∓ margin). */
  threshold: number;
  /** How the threshold was obtained (fixed by the model owner, 'auto' from the reference batches, …). */
  method: string;
}

export interface EndpointRuleView {
  criteria: EndpointCriterionView[];
  combine: 'all' | 'any';
  confirm: number;
  nearingMin: number;
  /** No 'done' before this many minutes from the batch start (0: none), and how it was obtained ('none' when not set). */
  minElapsedMin: number;
  minElapsedMethod: string;
  /** Run-time guards that hold a met and confirmed rule ('held'), and the hysteresis of its states in spectra (absent from servers before holds existed). */
  hold?: { alarms: boolean; extrapolation: boolean };
  hysteresis?: number;
  /** The caution shown with every endpoint rule. */
  caution: string;
}

export interface PropertyModelView {
  name: string;
  unit: string;
  target: number | null;
  direction: 'below' | 'above' | null;
  components: number;
  componentsRule: string;
  /** The LV count chosen is the largest searched. */
  atSearchLimit: boolean;
  cvMethod: string;
  /** RMSECV per LV count (rmsecv[a − 1]) and with none; bias (mean CV residual ŷ − y) per LV count. */
  rmsecv: number[];
  rmsecv0: number;
  bias: number[];
  nLabValues: number;
  nBatchesWithLab: number;
  nBatches: number;
  batchesWithoutLab: string[];
  /** Range of the lab values used (the calibration range), and the range the calibration was restricted to (null: none). */
  calibrationRange: [number, number];
  restrictedTo: [number, number] | null;
  /** The lab method's sd of one result as the model owner stated it (settings.property.labSd), or null: not stated (the automatic margin then takes RMSECV whole). */
  labSd?: number | null;
  /**
   * The flag "prediction outside its calibration": limits of the prediction's X-space T² and Q
   * (beyond either: flagged), their overall confidence and how they were calibrated.
   */
  extrapolation: { confidence: number; t2Limit: number; qLimit: number; t2Method: string; qMethod: string; method: string };
}

export interface ReferenceEndpointView {
  batch: string;
  index: number;
  elapsedMin: number;
  source: 'lab' | 'marked' | 'marked-last';
  detail: string;
  bracket?: { fromIndex: number; toIndex: number; fromMin: number; toMin: number };
}

export interface EndpointCheckRowView {
  batch: string;
  knownIndex: number | null;
  knownMin: number | null;
  knownSource: 'lab' | 'marked' | 'marked-last' | null;
  bracketMin: [number, number] | null;
  firedIndex: number | null;
  firedMin: number | null;
  /** fired − known (negative: early), spectrum intervals and minutes. */
  intervals: number | null;
  minutes: number | null;
  /** No known endpoint, lab values never past the target: the first spectrum after the last of them (the endpoint is no earlier) and that lab value in words; a call before it is early, counted from it. */
  notBefore?: { index: number; min: number; text: string } | null;
  propertyAtFire: number | null;
  /**
   * 'within bracket': the call lies inside the lab bracket of a lab-placed endpoint (after the last
   * lab value short of the target, at or before the first past it) — neither early nor late as far
   * as the lab values can tell; 'early' is then a call at or before the bracket's start, 'late' one
   * after its end. Marked endpoints: early / on time / late against the mark.
   */
  verdict: 'early' | 'within bracket' | 'on time' | 'late' | 'not reached' | 'no known endpoint';
  /** verdict is 'within bracket' (in models built before that verdict: an early call inside the bracket). */
  withinBracket: boolean;
}

export interface EndpointCheckView {
  method: string;
  rows: EndpointCheckRowView[];
  early: number;
  /** Calls inside the lab bracket (absent in models built before that verdict). */
  withinBracketCount?: number;
  /** In models built before the 'within bracket' verdict: early calls inside the bracket; 0 since. */
  earlyWithinBracket: number;
  earlyMaxIntervals: number;
  earlyMaxMinutes: number;
  late: number;
  onTime: number;
  notReached: number;
  noEndpoint: number;
  medianIntervals: number | null;
}

/** The golden envelope in a form ready to draw. Arrays share the index of `progress`. */
export interface ModelEnvelopeView {
  versionId: string;
  progressKind: 'time' | 'indicator';
  /** 'min' for time, otherwise the indicator's name. */
  progressUnit: string;
  progress: number[];
  scores: { pc: number; expected: number[]; lower: number[]; upper: number[] }[];
  /** Per-progress limits when the model has them, else null. */
  local: { t2: number[]; q: number[] } | null;
  limits: { t2: number; q: number; combined: number | null; confidence: number };
  /** Empty here: the reference batches' paths come from GET …/references (ModelReferencesView). */
  references: ReferencePath[];
}

/** A reference batch's path: replayed through the version's monitor, at most 200 points; scores[i][pc − 1] at progress[i]. */
export interface ReferencePath {
  batch: string;
  progress: number[];
  scores: number[][];
}

/** GET /api/models/versions/:version/references: the reference batches' paths, for drawing (thin lines). */
export interface ModelReferencesView {
  versionId: string;
  references: ReferencePath[];
}

export interface BuildModelRequest {
  name: string;
  product: string;
  referenceBatches: string[];
  /** BuildSettings fields other than name/product/author/createdAt; omitted fields take defaults. */
  settings?: Record<string, unknown>;
}

export interface EvaluateModelRequest {
  batches: string[];
}

export interface BatchEvaluation {
  batch: string;
  spectra: number;
  /** Spectra with T² or Q above the limit (single points). */
  pointsOutside: number;
  /** Alarms (after on-delay) raised during replay. */
  alarms: number;
  firstAlarmAt: number | null;
  firstAlarmKind: string | null;
  endpointAt: number | null;
  maxT2: number;
  maxQ: number;
  /** Spectra with T² above the version's T² limit, and with Q above its Q limit (absent in evaluations stored before they were counted). */
  t2Beyond?: number;
  qBeyond?: number;
  /**
   * As the monitor judges: spectra from the start-up minutes on, and those beyond the limits it
   * raises its T² and Q conditions with (its alarm limits). Absent in evaluations stored before.
   */
  judged?: { points: number; t2Beyond: number; qBeyond: number; confidence: number };
}

export interface EvaluationResult {
  id: string;
  versionId: string;
  createdAt: number;
  createdBy: string;
  batches: BatchEvaluation[];
  /** The batches the evaluator marked as known faulty (stored with the evaluation, so the approver sees what the builder saw). */
  faulty?: string[];
  /** The approval evidence computed from this evaluation (core/evaluate/approval-evidence.ts). */
  evidence?: ApprovalEvidence;
}

/** A share of points beyond a limit on held-out good batches, with its exact binomial interval. */
export interface RateEvidence {
  /** 'T²' or 'Q'. */
  name: string;
  beyond: number;
  points: number;
  rate: number;
  /** Clopper–Pearson two-sided 95 % interval of the rate. */
  interval: [number, number];
  /** Far above the nominal rate (blocks approval without evidenceOverride). */
  farAbove: boolean;
  /** Far below the nominal rate (limit may be too wide; a warning). */
  farBelow: boolean;
}

export interface ApprovalWarning {
  /** 't2-rate' | 'q-rate' (blocking), 't2-rate-low' | 'q-rate-low' | 'worst-batch' | 'good-batch-alarmed' | 'endpoint-not-reached' | 'early-endpoint' | 'no-held-out'. */
  code: string;
  /** Approval needs evidenceOverride (a reason, signed) while a blocking warning stands. */
  blocking: boolean;
  text: string;
}

/**
 * What the approver sees: the version's latest evaluation on held-out good batches
 * (GET /api/models/versions/:version/approval-evidence; also in EvaluationResult.evidence).
 */
export interface ApprovalEvidence {
  evaluationId: string;
  evaluatedAt: number;
  /** The version's limit confidence (e.g. 0.99) and the nominal share of points beyond a limit (1 − confidence). */
  confidence: number;
  nominalRate: number;
  heldOutGood: string[];
  /** Evaluated batches left out of the rates, and why (marked faulty; a reference batch of this version). */
  excluded: { batch: string; why: string }[];
  /** Spectra of the held-out good batches. */
  points: number;
  t2: RateEvidence;
  q: RateEvidence;
  /** The held-out good batches as the monitor judges them (BatchEvaluation.judged, summed); absent when an evaluated batch lacks it. Model health compares live batches with this. */
  judged?: { batches: number; points: number; t2Beyond: number; qBeyond: number; t2Batches: number; qBatches: number; confidence: number };
  /** The good batch with the largest share of points beyond a limit. */
  worst: { batch: string; spectra: number; beyond: number; share: number } | null;
  alarmedGood: { batch: string; alarms: number; firstKind: string | null }[];
  endpoint: { reached: number; of: number; notReached: string[] };
  /** Early calls of the leave-one-batch-out endpoint check on the reference batches. */
  earlyCalls: { count: number; text: string | null };
  warnings: ApprovalWarning[];
  method: string;
}

export interface ApproveModelRequest {
  reason: string;
  password?: string;
  /**
   * Required when the version's endpoint check shows the rule reaching done before the known
   * endpoint on a reference batch (422 without it, naming the batches); refused when there is
   * nothing to override. Signed with the approval and kept in the signature and the audit record.
   */
  earlyEndpointOverride?: string;
  /**
   * Required when the approval evidence (the version's latest evaluation on held-out good batches)
   * shows a point rate far above nominal: the reason for approving anyway. Refused (422) when the
   * evidence shows nothing to override. Signed with the approval and kept with its evidence.
   */
  evidenceOverride?: string;
  /** Days from approval to the periodic review of the version (default 365; docs/model-life.md). Signed with the approval. */
  reviewIntervalDays?: number;
}

export interface EvaluateModelRequest {
  batches: string[];
  /** Batches known to be faulty: replayed and shown, left out of the approval evidence's rates. */
  faulty?: string[];
}

export interface RetireModelRequest {
  reason: string;
}

// ---- deployments ------------------------------------------------------------------------------

export interface Deployment {
  id: string;
  unit: string;
  model: ModelRef;
  deployedAt: number;
  deployedBy: string;
  reason: string | null;
  /** Set when a later deployment replaced this one or the model was retired. */
  endedAt: number | null;
  active: boolean;
}

/** One thing that changes when a version replaces the one deployed on a unit. */
export interface DeployChange {
  /** What changes, in words: "endpoint rule", "property model", "T² limit", "components", … */
  what: string;
  /** As deployed now, and as it will be; null where one side has none. */
  before: string | null;
  after: string | null;
}

/**
 * What a deployment changes against the version it replaces (GET /api/deployments/preview, and the
 * answer and audit entry of POST /api/deployments).
 */
export interface DeployComparison {
  /** The version deployed on the unit now; null when none is. */
  replaces: ModelRef | null;
  /** Only what differs: endpoint rule, property model, limits (T², Q, alarm limits), components, preprocessing axis, product. */
  changes: DeployChange[];
  /** Plain sentences to show before the user confirms (e.g. the endpoint property is dropped). */
  warnings: string[];
  /** The new version has no property model, no property endpoint criterion or no endpoint rule at all where the old one had: deploying it needs a signed reason. */
  dropsEndpointProperty: boolean;
}

/** Why a version cannot judge a unit's batches (each names both sides). */
export interface DeployMismatch {
  /** 'axis' (wavelength count or range), 'product', 'kind' (the reference batches' unit kind). */
  what: 'axis' | 'product' | 'kind';
  /** e.g. "model dryer-A v3 expects 256 points, 1100–2498 nm; reactor-1's analyzer nir-reactor-1 sends 601 points, 1000–2200 nm". */
  text: string;
}

/** GET /api/deployments/preview?unit=…&versionId=…: whether a version fits a unit, and what would change. */
export interface DeployPreview {
  unit: string;
  model: ModelRef;
  /** Empty when the version fits the unit; otherwise POST /api/deployments refuses (422 model-does-not-fit). */
  mismatches: DeployMismatch[];
  comparison: DeployComparison;
  /** True when POST must carry confirmEndpointLoss (the comparison drops the endpoint property). */
  needsEndpointLossConfirmation: boolean;
}

/** The answer of POST /api/deployments: the deployment and what it changed. */
export interface DeployResult extends Deployment {
  comparison: DeployComparison;
}

export interface DeployModelRequest {
  unit: string;
  versionId: string;
  reason?: string;
  /** Required (a reason, kept in the audit entry) when the deployment drops the endpoint property; refused otherwise. */
  confirmEndpointLoss?: string;
}

// ---- alarms -----------------------------------------------------------------------------------

export interface Alarm {
  id: string;
  unit: string;
  batch: string | null;
  kind: AlarmKind;
  /** Condition key, e.g. 't2', 'q', 'pc1', 'stale'. */
  key: string;
  state: AlarmState;
  priority: AlarmPriority;
  /** What crossed which limit, by how much (latest). */
  message: string;
  value: number | null;
  limit: number | null;
  /** Condition currently present (process side), independent of acknowledgement. */
  active: boolean;
  raisedAt: number;
  clearedAt: number | null;
  acknowledgedAt: number | null;
  acknowledgedBy: string | null;
  acknowledgeComment: string | null;
  /** Shelved until this time (ms epoch); null when not shelved. */
  shelvedUntil: number | null;
  shelvedBy: string | null;
  shelveReason: string | null;
  /** seq of the spectrum of the latest change (raised, cleared), when a spectrum caused it. */
  seq: number | null;
  /**
   * The analyzer's time (ms epoch) of the spectrum that raised the alarm, and of the spectrum of its
   * latest change (the one `seq` names); raisedAt/clearedAt are the server's time of receipt.
   * Null when no spectrum caused it (stale data, analyzer status) or for alarms stored before.
   */
  raisedSpectrumT?: number | null;
  spectrumT?: number | null;
  updatedAt: number;
  /** Activations within the chattering window (ANSI/ISA-18.2: 60 s), counted since the server started. */
  recentActivations?: number;
  /** ≥ 3 activations within 60 s (ANSI/ISA-18.2-2016, ISA-TR18.2.5): the alarm chatters. */
  chattering?: boolean;
  /**
   * Suppressed by state (ISA-18.2 designed suppression): 'no-batch' (its batch is not running) or
   * 'function-check' (the analyzer reports NE 107 function check). While suppressed the state reads
   * 'normal' and `active` still follows the condition; empty or absent when annunciated.
   */
  suppressedBy?: SuppressionReason[];
}

export interface AcknowledgeAlarmRequest {
  comment?: string;
}

/**
 * Acknowledge a group of alarms (e.g. the alarms an ended batch left to acknowledge) in one action:
 * each alarm still moves through its own life cycle (ISA-18.2), the action is one audit entry
 * (`alarm.acknowledge-group`) listing them. All or none: one that has nothing to acknowledge
 * refuses the group (409).
 */
export interface AcknowledgeAlarmsRequest {
  alarms: string[];
  comment?: string;
}

export interface AlarmGroupAcknowledgement {
  acknowledged: number;
  /** Each alarm after the acknowledgement. */
  alarms: Alarm[];
}

export interface ShelveAlarmRequest {
  /** Minutes until the shelve expires; 1…1440. */
  minutes: number;
  reason: string;
}

// ---- added after v1 types (additive): views proposed by the dashboard -------------------------
// | GET | /api/batches/:batch/spectrum-view?seq= | SpectrumView |
// | GET | /api/models/versions/:version/calibration | CalibrationView |
// (GET /api/batches/:batch/comparison is served by server/transfer; see its index.ts for the shape.)

/**
 * One spectrum raw and after the model's preprocessing, with the golden band at the spectrum's
 * progress: the reference batches' spectra near that progress, one mean spectrum per batch, mean ±
 * k·sd between batches per wavelength (golden arrays null when there is no band; `golden` says why).
 */
export interface SpectrumView {
  batch: string;
  seq: number;
  t: number;
  raw: { axis: number[]; values: number[]; goldenMean: number[] | null; goldenLower: number[] | null; goldenUpper: number[] | null };
  preprocessed: { axis: number[]; values: number[]; goldenMean: number[] | null; goldenLower: number[] | null; goldenUpper: number[] | null } | null;
  /** How the band was made (null arrays above: `note` says why there is none). */
  golden?: { versionId: string; progress: number; progressFrom: number; progressTo: number; batches: number; spectra: number; k: number; method: string } | { versionId: string | null; note: string };
}

/** Calibration diagnostics of a model version, for Model bench. */
export interface CalibrationView {
  versionId: string;
  explained: number[];
  cumulative: number[];
  /** Cross-validation PRESS per number of components, 1…max. */
  press: number[];
  recommended: number;
  modelAxis: number[];
  /** loadings[pc-1][variable] */
  loadings: number[][];
  samples: { batch: string; index: number; t2: number; q: number; excluded: boolean }[];
  limits: { t2: number; q: number; confidence: number };
}

/** Statistics of one way of judging the held-out transfer samples (core/calibration-transfer/transfer-model.ts). */
export interface TransferSideStats {
  /** Spectra beyond the version's T² limit, its Q limit, either; with the exact 95 % interval of the share beyond either. */
  t2Beyond: number;
  qBeyond: number;
  beyond: number;
  rate: number;
  interval: [number, number];
  t2Median: number;
  qMedian: number;
  t2Max: number;
  qMax: number;
}

/** The property predicted on the held-out transfer samples: RMS differences, in the property's unit. */
export interface TransferPropertyStats {
  name: string;
  unit: string;
  /** RMS of (prediction − the old analyzer's prediction of the same sample), before and after transfer. */
  vsOld: { before: number; after: number };
  /** RMS of (prediction − lab value) where the transfer samples carry lab values within the property model's range (null: none). */
  vsLab: { n: number; old: number; before: number; after: number } | null;
  /** The property model's own RMSECV (null: not known); the transfer's error is judged against it. */
  rmsecv: number | null;
  /** The prediction after transfer differs from the old analyzer's by more than the model's RMSECV: approval needs evidenceOverride. */
  off: boolean;
}

/** How a transferred version was judged on held-out transfer samples, stored in its (hashed) model file. */
export interface TransferJudgement {
  spectra: number;
  confidence: number;
  t2Limit: number;
  qLimit: number;
  /** The old analyzer's spectra of the same samples, judged by the source version. */
  old: TransferSideStats;
  /** The new analyzer's spectra interpolated linearly onto the old axis (no transfer). */
  before: TransferSideStats;
  /** The new analyzer's spectra through the transform. */
  after: TransferSideStats;
  /** RMS spectral difference from the old analyzer's spectrum (absorbance units), before and after. */
  spectralRms: { before: number; after: number };
  property: TransferPropertyStats | null;
  /** After transfer, far above both nominal and the old analyzer's own rate on the same samples: approval needs evidenceOverride. */
  farAbove: boolean;
  method: string;
}

/** One transfer set: the same samples measured on the old analyzer (a batch) and on the new one (a batch), row for row. */
export interface TransferPairView {
  old: string;
  new: string;
  spectra: number;
}

/** The calibration transfer a version carries (null on a version built from reference batches). */
export interface CalibrationTransferView {
  method: 'ds' | 'pds';
  /** PDS window (slave pixels), null for DS. */
  window: number | null;
  rcond: number;
  maxRank: number | null;
  /** Rank kept: DS the one pseudo-inverse, PDS the smallest and largest over the windows. */
  rank: { min: number; max: number };
  oldAxis: { points: number; from: number; to: number };
  newAxis: { points: number; from: number; to: number };
  source: { modelId: string; sha256: string; name: string; version: number | null; versionId: string | null };
  fit: TransferPairView[];
  heldOut: TransferPairView[];
  judgement: TransferJudgement;
  createdAt: number;
  author: string;
  caution: string;
}

/** POST /api/models/versions/:version/transfer */
export interface TransferModelRequest {
  method: 'ds' | 'pds';
  window?: number;
  rcond?: number;
  maxRank?: number;
  /** Transfer sets the transform is fitted on. */
  fit: { old: string; new: string }[];
  /** Transfer sets kept out of the fit and used only to judge it. */
  heldOut: { old: string; new: string }[];
}

/** A plant-history decomposition job (POST /api/models/history-pca, GET /api/models/history-pca/:job; docs/plant-history-builds.md). */
export interface HistoryJobView {
  job: string;
  status: 'running' | 'done' | 'failed';
  startedAt: number;
  startedBy: string;
  batches: number;
  components: number;
  groups: number;
  /** While running: the pass, batches read of all, spectra read (server/models/history-pca.ts). */
  progress: { pass: 'scatter' | 'cross-validation'; batches: number; of: number; spectra: number } | null;
  result: {
    spectra: number;
    variables: number;
    workers: number;
    eigenvalues: number[];
    explained: number[];
    cumulative: number[];
    press: number[] | null;
    /** Component count of least PRESS (null without cross-validation). */
    leastPress: number | null;
    seconds: { scatter: number; decomposition: number; crossValidation: number; total: number };
    chain: string;
  } | null;
  error: string | null;
}

