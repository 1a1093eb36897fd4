/**
 * Plain names for the codes Tideline keeps in its API, exports and model files. A code stays in
 * the data (stable, machine-readable: `t2-f-new`, `mbsd`, `pc3`, `pace`); wherever a person reads
 * it — a report, a screen — it is shown by the name given here. One vocabulary for the server and
 * the dashboard. Pure: no I/O.
 */
import type { AlarmState, EndpointState } from '../monitor/types.ts';

/** Control-limit methods (core/limits): code → name. */
export const LIMIT_METHOD_NAMES: Readonly<Record<string, string>> = {
  't2-f-new': 'Hotelling T², F distribution, new observation',
  't2-beta-calibration': 'Hotelling T², beta distribution, calibration observation',
  't2-chi2': 'Hotelling T², chi-squared approximation',
  'q-jackson-mudholkar': 'Q (SPE), Jackson–Mudholkar approximation',
  'q-box': 'Q (SPE), Box (1954) approximation',
  'q-box-moments': 'Q (SPE), Box approximation from the moments of Q',
  'jackson-mudholkar': 'Jackson–Mudholkar approximation',
  box: 'Box (1954) approximation',
};

/** Endpoint criteria (core/endpoint): kind → name. */
export const CRITERION_NAMES: Readonly<Record<string, string>> = {
  property: 'predicted property',
  mbsd: 'moving-block standard deviation',
  plateau: 'score plateau',
  'golden-end': 'golden end region',
};

/** Endpoint states: code → name (the code is kept in the API). */
export const ENDPOINT_STATE_NAMES: Readonly<Record<EndpointState | 'held', string>> = {
  running: 'running',
  nearing: 'nearing',
  settling: 'settling (confirming)',
  held: 'held (rule met, a guard stands)',
  done: 'reached',
  signalled: 'reached and signalled',
};

/** ISA-18.2 alarm states: code → name. */
export const ALARM_STATE_NAMES: Readonly<Record<AlarmState, string>> = {
  normal: 'normal',
  'active-unacknowledged': 'active, not acknowledged',
  'active-acknowledged': 'active, acknowledged',
  'cleared-unacknowledged': 'cleared, not acknowledged',
};

/** Alarm kinds: code → name. */
export const ALARM_KIND_NAMES: Readonly<Record<string, string>> = {
  t2: 'Hotelling T²',
  q: 'Q (SPE)',
  combined: 'combined index',
  envelope: 'golden envelope',
  property: 'predicted property',
  stale: 'no data',
  analyzer: 'analyzer',
  'model-mismatch': 'model does not fit the analyzer',
  suspect: 'repeated suspect scans',
  signal: 'signal may be lost',
};

/** Alarm keys that are not per PC: code → name. */
const ALARM_KEY_NAMES: Readonly<Record<string, string>> = {
  t2: 'Hotelling T²',
  q: 'Q (SPE)',
  combined: 'combined index',
  pace: 'pace',
  stale: 'no data from the analyzer',
  'model-axis': 'model does not fit the analyzer',
  'model-mismatch': 'model does not fit the analyzer',
  'analyzer-failure': 'analyzer failure',
  'function-check-overdue': 'function check overdue',
  'repeated-suspect': 'repeated suspect scans',
  property: 'predicted property',
};

/** Suppression reasons (ISA-18.2 designed suppression): code → name. */
export const SUPPRESSION_NAMES: Readonly<Record<string, string>> = {
  'no-batch': 'no batch running',
  'function-check': 'analyzer in function check',
};

/** The name of an alarm by its key: 'pc3' → 'PC3 score', 't2' → 'Hotelling T²', 'pace' → 'pace'. */
export function alarmName(key: string): string {
  const pc = /^pc(\d+)$/i.exec(key);
  if (pc) return `PC${pc[1]} score`;
  return ALARM_KEY_NAMES[key] ?? ALARM_KIND_NAMES[key] ?? key.replace(/-/g, ' ');
}

/** The name of a limit method; a method text "code — note" keeps its note. */
export function limitMethodName(method: string): string {
  const m = /^([a-z0-9-]+)(\s*[—–-]\s*)?(.*)$/s.exec(method.trim());
  if (m && LIMIT_METHOD_NAMES[m[1]!]) return m[3] ? `${LIMIT_METHOD_NAMES[m[1]!]} — ${plainText(m[3])}` : LIMIT_METHOD_NAMES[m[1]!]!;
  return plainText(method);
}

export function criterionName(kind: string): string {
  return CRITERION_NAMES[kind] ?? kind.replace(/-/g, ' ');
}

export function endpointStateName(state: string | null | undefined): string {
  if (!state) return 'not judged';
  return (ENDPOINT_STATE_NAMES as Record<string, string>)[state] ?? state;
}

export function alarmStateName(state: string): string {
  return (ALARM_STATE_NAMES as Record<string, string>)[state] ?? state;
}

/**
 * Free text made plain: code words that slip into messages and method texts ("MBSD 0.002 ≤ …",
 * "q-jackson-mudholkar", "T2", "PACE", a band assignment marked "from memory" for the developers)
 * replaced by their names. Idempotent.
 */
export function plainText(text: string): string {
  let s = text;
  for (const [code, name] of Object.entries(LIMIT_METHOD_NAMES)) {
    if (code.includes('-')) s = s.replace(new RegExp(`(?<![\\w-])${code}(?![\\w-])`, 'g'), name);
  }
  s = s
    .replace(/\bMBSD\b/g, 'moving-block SD')
    .replace(/(?<![\w-])mbsd(?![\w-])/g, 'moving-block standard deviation')
    .replace(/(?<![\w-])golden-end(?![\w-])/g, 'golden end region')
    .replace(/\bT2\b/g, 'T²')
    .replace(/\bPACE\b/g, 'pace')
    .replace(/(?<![\w-])pc(\d+)(?![\w-])/g, 'PC$1')
    .replace(/,?\s*from memory\b/g, '');
  return s;
}

/** A band assignment as a reader should see it (without the developers' "from memory" marker). */
export function assignmentName(assignment: string): string {
  return assignment.replace(/,?\s*from memory\b/g, '').trim();
}

/**
 * Code words that must not reach a person in a report: each is a code kept in the API and
 * exports, with its plain name above. Used by the tests of every report.
 */
export const INTERNAL_CODE_WORDS: readonly string[] = [
  't2-f-new', 't2-beta-calibration', 't2-chi2', 'q-jackson-mudholkar', 'q-box', 'q-box-moments', 'mbsd', 'MBSD', 'golden-end',
  'active-unacknowledged', 'active-acknowledged', 'cleared-unacknowledged', 'no-batch', 'model-axis', 'analyzer-failure',
  'function-check-overdue', 'repeated-suspect', 'PACE', 'T2', 'from memory',
];
