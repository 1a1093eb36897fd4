/**
 * Comparison of a candidate version run in shadow with the version deployed on the same unit, over
 * the same batches (same stored spectra): confirmed alarms per batch, conditions caught by one and
 * not the other, endpoint calls and their difference, and the property prediction against the lab
 * values attached to the batch. Pure: the caller passes each side's stored results.
 */
import type { ShadowBatchComparison, ShadowComparison, ShadowRun, ShadowSide } from '../api/model-life.ts';

/** The fields of a stored MonitorResult the comparison reads. */
export interface ComparedResult {
  seq: number;
  t: number;
  conditionChanges: { key: string; active: boolean }[];
  events: { type: string; to?: string; t: number }[];
  prediction: { value: number } | null;
  quality?: { judged: boolean };
}

export interface LabPoint {
  /** seq of the spectrum the lab sample was matched to. */
  seq: number;
  value: number;
}

type LabFigures = NonNullable<ShadowSide['lab']>;

function labFigures(residuals: number[]): LabFigures | null {
  if (!residuals.length) return null;
  const ss = residuals.reduce((a, r) => a + r * r, 0);
  return { n: residuals.length, rmse: Math.sqrt(ss / residuals.length), bias: residuals.reduce((a, r) => a + r, 0) / residuals.length };
}

export function compareSide(versionId: string | null, results: readonly ComparedResult[], lab: readonly LabPoint[]): ShadowSide & { residuals: number[] } {
  let spectra = 0;
  let alarms = 0;
  const keys = new Set<string>();
  let endpointAt: number | null = null;
  const predBySeq = new Map<number, number>();
  for (const r of results) {
    if (r.quality?.judged === false) continue;
    spectra++;
    for (const c of r.conditionChanges) {
      if (!c.active) continue;
      alarms++;
      keys.add(c.key);
    }
    for (const e of r.events) if (e.type === 'endpoint-state' && e.to === 'done' && endpointAt === null) endpointAt = e.t;
    if (r.prediction && Number.isFinite(r.prediction.value)) predBySeq.set(r.seq, r.prediction.value);
  }
  const residuals: number[] = [];
  for (const l of lab) {
    const p = predBySeq.get(l.seq);
    if (p !== undefined) residuals.push(p - l.value);
  }
  return { versionId, spectra, alarms, conditions: [...keys].sort(), endpointAt, lab: labFigures(residuals), residuals };
}

export function compareBatch(
  batch: { id: string; startT: number },
  deployed: { versionId: string | null; results: readonly ComparedResult[] },
  candidate: { versionId: string; results: readonly ComparedResult[] },
  lab: readonly LabPoint[],
): ShadowBatchComparison & { residuals: { deployed: number[]; candidate: number[] } } {
  const d = compareSide(deployed.versionId, deployed.results, lab);
  const c = compareSide(candidate.versionId, candidate.results, lab);
  const { residuals: rd, ...ds } = d;
  const { residuals: rc, ...cs } = c;
  return {
    batch: batch.id,
    startT: batch.startT,
    deployed: ds,
    candidate: cs,
    onlyDeployed: ds.conditions.filter((k) => !cs.conditions.includes(k)),
    onlyCandidate: cs.conditions.filter((k) => !ds.conditions.includes(k)),
    endpointDifferenceMin: ds.endpointAt !== null && cs.endpointAt !== null ? (cs.endpointAt - ds.endpointAt) / 60_000 : null,
    residuals: { deployed: rd, candidate: rc },
  };
}

const f1 = (v: number) => (Math.abs(v) >= 10 ? v.toFixed(0) : v.toFixed(1));

export function shadowComparison(run: ShadowRun, compared: ReturnType<typeof compareBatch>[]): ShadowComparison {
  const n = compared.length;
  const batches: ShadowBatchComparison[] = compared.map(({ residuals: _r, ...b }) => b);
  const diffs = batches.map((b) => b.endpointDifferenceMin).filter((v): v is number => v !== null);
  const sum = (f: (b: ShadowBatchComparison) => number) => batches.reduce((a, b) => a + f(b), 0);
  const labDeployed = labFigures(compared.flatMap((b) => b.residuals.deployed));
  const labCandidate = labFigures(compared.flatMap((b) => b.residuals.candidate));
  const s = {
    batches: n,
    deployedAlarmsPerBatch: n ? sum((b) => b.deployed.alarms) / n : 0,
    candidateAlarmsPerBatch: n ? sum((b) => b.candidate.alarms) / n : 0,
    batchesOnlyDeployed: batches.filter((b) => b.onlyDeployed.length > 0).length,
    batchesOnlyCandidate: batches.filter((b) => b.onlyCandidate.length > 0).length,
    endpointBoth: diffs.length,
    endpointOnlyDeployed: batches.filter((b) => b.deployed.endpointAt !== null && b.candidate.endpointAt === null).length,
    endpointOnlyCandidate: batches.filter((b) => b.candidate.endpointAt !== null && b.deployed.endpointAt === null).length,
    endpointMeanDifferenceMin: diffs.length ? diffs.reduce((a, b) => a + b, 0) / diffs.length : null,
    endpointMaxAbsDifferenceMin: diffs.length ? Math.max(...diffs.map(Math.abs)) : null,
    labDeployed,
    labCandidate,
    text: [] as string[],
  };
  const t = s.text;
  if (n === 0) t.push('No batch has been judged in shadow yet: the candidate judges batches that start after the run started.');
  else {
    t.push(`${n} batch${n === 1 ? '' : 'es'} judged by both: ${s.deployedAlarmsPerBatch.toFixed(2)} confirmed alarms per batch deployed, ${s.candidateAlarmsPerBatch.toFixed(2)} candidate.`);
    if (s.batchesOnlyDeployed) t.push(`On ${s.batchesOnlyDeployed} batch(es) the deployed version caught a condition the candidate did not.`);
    if (s.batchesOnlyCandidate) t.push(`On ${s.batchesOnlyCandidate} batch(es) the candidate caught a condition the deployed version did not.`);
    if (s.endpointBoth) {
      const m = s.endpointMeanDifferenceMin!;
      const when = Math.abs(m) < 0.05 ? 'at the same time on average' : `candidate ${m > 0 ? 'later' : 'earlier'} by ${f1(Math.abs(m))} min on average`;
      t.push(`Endpoint called by both on ${s.endpointBoth} batch(es): ${when} (largest difference ${f1(s.endpointMaxAbsDifferenceMin!)} min).`);
    }
    if (s.endpointOnlyDeployed) t.push(`Endpoint called by the deployed version only on ${s.endpointOnlyDeployed} batch(es).`);
    if (s.endpointOnlyCandidate) t.push(`Endpoint called by the candidate only on ${s.endpointOnlyCandidate} batch(es).`);
    if (labDeployed || labCandidate) t.push(`Against ${Math.max(labDeployed?.n ?? 0, labCandidate?.n ?? 0)} lab value(s): RMSE deployed ${labDeployed ? labDeployed.rmse.toPrecision(3) : '—'}, candidate ${labCandidate ? labCandidate.rmse.toPrecision(3) : '—'}.`);
  }
  return {
    run,
    batches,
    summary: s,
    method: 'Both versions judged the same stored spectra of each batch; alarms are confirmed conditions (after each version\'s on-delay), counted whether or not the deployed one was annunciated; a condition is named by its key (t2, q, combined, pc1 … for the envelope, property, analyzer). Lab values are compared with each version\'s prediction at the spectrum the sample was matched to.',
  };
}
