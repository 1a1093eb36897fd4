/**
 * `npm run evaluate` — build a monitoring model from a simulated reference set, judge fresh
 * simulated batches (other seeds): good ones and one set per fault type, and report the figures of
 * the evaluation (core/evaluate/evaluate-model.ts defines them). `-- --json FILE` also writes them as JSON.
 * Options: --kind dryer|reactor, --reference N, --good N, --per-fault N, --seed S, --components A|auto.
 *
 * Beside these, the site-style set (simulators/site-set.ts: another instrument and axis, elapsed
 * seconds, loss-on-drying moisture on a few spectra per batch, operators stopping late) is taken
 * through the public paths by scripts/site-check.ts — CLI import, REST build/approve/deploy, /ingest,
 * REST read-back on a server started as a child process — and reported as the site_* keys:
 * site_endpoint_early_max, site_endpoint_error_median (minutes; good batches),
 * site_done_while_alarm (batches called done while a confirmed T²/Q condition stood), and the others
 * docs/evaluation.md lists. Options: --no-site, --site-reference N, --site-good N, --site-per-fault N.
 *
 * Tideline advises: the site's validated control strategy, interlocks and procedures decide what an
 * alarm or endpoint signal may do.
 */
import { writeFileSync } from 'node:fs';
import { pathToFileURL } from 'node:url';
import { simulateBatch, simulateReferenceSet, FAULT_INFO, type FaultSpec, type FaultType, type ProcessKind, type SimulatedBatch } from '../simulators/batch.ts';
import { buildMonitoringModel, type MonitoringModel, type ReferenceBatch } from '../core/model/monitoring-model.ts';
import { defaultBuildSettings } from '../core/model/default-settings.ts';
import type { BuildSettings } from '../core/model/build-settings.ts';
import { evaluateModel, evaluationMarkdown, type EvalBatch, type EvaluationFigures } from '../core/evaluate/evaluate-model.ts';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { prepareSiteSet, runSiteCheck, type SiteCheckResult, type SiteFigures } from './site-check.ts';

export interface EvaluationPlan {
  kind: ProcessKind;
  reference: number;
  good: number;
  perFault: number;
  seed: number;
  /** Settings overrides for the model build. */
  settings?: Record<string, unknown>;
  /** Fault groups to judge (default: every fault type of the process). */
  faults?: FaultType[];
}

/** Fault parameters of the evaluation sets: the spike train is denser than the simulator default. */
const EVAL_FAULT_PARAMS: Partial<Record<FaultType, Record<string, number>>> = {
  // a spike train: a spike in about half the scans from onset
  spikes: { probability: 0.5 },
};

/** Step faults (evaluation target: detection_delay_median ≤ 10 spectra); the others are drifts or batch-level. */
export const STEP_FAULTS: FaultType[] = ['wrong-material', 'spikes', 'dropout'];

/**
 * The evaluation's build settings: the per-kind defaults of core (core/model/default-settings.ts),
 * named for the evaluation. The demo (scripts/demo.ts) uses the same.
 */
export function defaultSettings(kind: ProcessKind): BuildSettings {
  return defaultBuildSettings(kind, { name: `${kind} evaluation`, author: 'evaluation' });
}

function toReference(b: SimulatedBatch): ReferenceBatch {
  return { id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: b.truth.property.values };
}

function toEval(b: SimulatedBatch, group: string, intervalS: number): EvalBatch {
  const f = b.truth.faults[0];
  return { id: b.id, group, times: b.times, spectra: b.spectra, dropped: b.truth.dropped, endpointIndex: b.truth.endpointIndex, faultOnsetIndex: f ? f.onsetIndex : null, intervalS, property: b.truth.property.values, ...(f?.pixels ? { badPixels: f.pixels } : {}) };
}

export function runEvaluation(plan: EvaluationPlan): { model: MonitoringModel; figures: EvaluationFigures; buildMs: number } {
  const ref = simulateReferenceSet(plan.kind, plan.reference, plan.seed);
  const intervalS = (ref[0].times[1] - ref[0].times[0]) / 1000;
  const settings = { ...defaultSettings(plan.kind), ...(plan.settings ?? {}) };
  const t0 = performance.now();
  const model = buildMonitoringModel(ref.map(toReference), settings);
  const buildMs = performance.now() - t0;
  const judged: EvalBatch[] = [];
  // Fresh seeds, away from the reference set's derived seeds.
  const base = (plan.seed * 7919 + 100_003) >>> 0;
  for (let i = 0; i < plan.good; i++) judged.push(toEval(simulateBatch(plan.kind, { seed: (base + i) >>> 0, id: `good-${i + 1}` }), 'good', intervalS));
  const faultTypes = plan.faults ?? (Object.keys(FAULT_INFO) as FaultType[]).filter((f) => FAULT_INFO[f].kinds.includes(plan.kind));
  faultTypes.forEach((type, ti) => {
    for (let i = 0; i < plan.perFault; i++) {
      const seed = (base + 1000 * (ti + 1) + i) >>> 0;
      // onsets spread over 10…30 min of the batch (over-wet is charged wet: onset 0)
      const onsetS = type === 'over-wet' ? 0 : 600 + ((i * 337) % 1200);
      const spec: FaultSpec = { type, onsetS, params: EVAL_FAULT_PARAMS[type] };
      judged.push(toEval(simulateBatch(plan.kind, { seed, id: `${type}-${i + 1}`, faults: [spec] }), type, intervalS));
    }
  });
  return { model, figures: evaluateModel(model, judged), buildMs };
}

export interface SitePlan {
  reference: number;
  good: number;
  perFault: number;
  seed: number;
}

/** The site-style figures as a Markdown table, with the goals the end-to-end test asserts. */
export function siteMarkdown(f: SiteFigures, r: Pick<SiteCheckResult, 'approval' | 'detail' | 'timings'>): string {
  const n = (v: number | null, d = 1) => (v === null ? '—' : v.toFixed(d));
  const prop = r.detail.property as { components: number; rmsecv: number[]; bias: number[]; nLabValues: number; nBatchesWithLab: number } | null;
  const check = r.detail.endpointCheck as { early: number; withinBracketCount?: number; onTime: number; late: number; notReached: number; medianIntervals: number | null } | null;
  return [
    `Site-style set (simulators/site-set.ts) through the public paths: ${f.site_reference_batches} reference batches, ${f.site_test_batches} test batches, a spectrum every ${f.site_interval_s} s.`,
    '',
    '| figure | value | goal |',
    '| --- | --- | --- |',
    `| site_endpoint_early_max (min; good batches; ≤ 0: never early) | ${n(f.site_endpoint_early_max, 2)} (${n(f.site_endpoint_early_max_intervals, 0)} intervals) | ≤ 1 interval |`,
    `| site_endpoint_error_median (min; good batches; > 0: late) | ${n(f.site_endpoint_error_median, 2)} (${n(f.site_endpoint_error_median_intervals, 1)} intervals) | reported |`,
    `| site_endpoint_error_abs_max_intervals (every done without a hold) | ${n(f.site_endpoint_error_abs_max_intervals, 0)} | reported (issue target ≤ 5) |`,
    `| site_endpoint_vs_rule_abs_max_intervals (from the rule's threshold crossing) | ${n(f.site_endpoint_vs_rule_abs_max_intervals, 0)} | ≤ 5 |`,
    `| site_done_while_alarm (batches) | ${f.site_done_while_alarm} | 0 |`,
    `| site_done_without_endpoint (batches) | ${f.site_done_without_endpoint} | 0 |`,
    `| site_endpoint_missed (good batches never done) | ${f.site_endpoint_missed} | 0 |`,
    `| site_pace_detected (slow drying flagged by pace) | ${f.site_pace_detected} of ${f.site_pace_batches} | all |`,
    `| site_pace_lost_at_done (slow drying done, pace flag gone) | ${f.site_pace_lost_at_done} | 0 |`,
    `| site_pace_false (good batches with a pace alarm) | ${f.site_pace_false} | reported |`,
    `| site_held_batches (endpoint held before done) | ${f.site_held_batches} | reported |`,
    `| true moisture at the call (good; median, min–max, % w/w) | ${f.site_moisture_at_done ? `${n(f.site_moisture_at_done.median, 3)} (${n(f.site_moisture_at_done.min, 3)}–${n(f.site_moisture_at_done.max, 3)})` : '—'} | reported |`,
    '',
    `Property model: ${prop ? `${prop.components} LV, RMSECV ${prop.rmsecv[prop.components - 1]!.toPrecision(3)} % w/w, bias ${prop.bias[prop.components - 1]!.toPrecision(2)} % w/w, from ${prop.nLabValues} lab values in ${prop.nBatchesWithLab} batches` : 'none'}. Endpoint check at build (leave one batch out): ${check ? `${check.early} early, ${check.withinBracketCount ?? '—'} within the lab bracket, ${check.onTime} on time, ${check.late} late, ${check.notReached} not reached, median ${check.medianIntervals ?? '—'} intervals` : '—'}. Approval: ${r.approval.firstStatus === 200 ? 'signed without an override' : `refused first (${r.approval.firstStatus}: ${r.approval.firstDetail}); signed with an early-endpoint override`}. Stages (ms): ${JSON.stringify(r.timings)}.`,
  ].join('\n');
}

function parseArgs(argv: string[]): { plan: EvaluationPlan; json: string | null; site: SitePlan | null } {
  const plan: EvaluationPlan = { kind: 'dryer', reference: 30, good: 30, perFault: 8, seed: 2026 };
  let site: SitePlan | null = { reference: 16, good: 20, perFault: 2, seed: 2026 };
  let json: string | null = null;
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i];
    const v = argv[i + 1];
    const int = (name: string): number => {
      const n = Number(v);
      if (!Number.isInteger(n) || n < 0) throw new Error(`${name} needs a non-negative integer, got "${v ?? ''}"`);
      i++;
      return n;
    };
    if (a === '--json') {
      if (!v) throw new Error('--json needs a file name');
      json = v;
      i++;
    } else if (a === '--kind') {
      if (v !== 'dryer' && v !== 'reactor') throw new Error(`--kind must be dryer or reactor, got "${v ?? ''}"`);
      plan.kind = v;
      i++;
    } else if (a === '--reference') plan.reference = int(a);
    else if (a === '--good') plan.good = int(a);
    else if (a === '--per-fault') plan.perFault = int(a);
    else if (a === '--seed') plan.seed = int(a);
    else if (a === '--components') plan.settings = { ...(plan.settings ?? {}), components: v === 'auto' ? (i++, 'auto') : int(a) };
    else if (a === '--no-site') site = null;
    else if (a === '--site-reference' || a === '--site-good' || a === '--site-per-fault') {
      if (!site) throw new Error(`${a} does not go with --no-site`);
      const k = a === '--site-reference' ? 'reference' : a === '--site-good' ? 'good' : 'perFault';
      site[k] = int(a);
      if (k === 'reference' && site.reference < 2) throw new Error('--site-reference needs at least 2 batches');
    } else throw new Error(`unknown option "${a}" (known: --json FILE, --kind, --reference, --good, --per-fault, --seed, --components, --no-site, --site-reference, --site-good, --site-per-fault)`);
  }
  if (site) site.seed = plan.seed;
  return { plan, json, site };
}

async function main(): Promise<void> {
  let args;
  try {
    args = parseArgs(process.argv.slice(2));
  } catch (e) {
    console.error(`evaluate: ${(e as Error).message}`);
    process.exit(2);
  }
  const { plan, json, site } = args;
  const { model, figures, buildMs } = runEvaluation(plan);
  console.log(evaluationMarkdown(figures));
  console.log(
    `\n${plan.kind}: ${plan.reference} reference batches (seed ${plan.seed}), ${plan.good} good, ${plan.perFault} per fault type; model ${model.pca.nComponents} PCs${model.pls ? `, PLS ${model.pls.components} LV` : ''}, build ${buildMs.toFixed(0)} ms.`,
  );
  const check = model.meta.endpointCheck;
  if (check) {
    console.log(
      `endpoint check at build (leave one batch out, against the reference batches' known endpoints): ${check.early} early (at most ${check.earlyMaxIntervals} intervals), ${check.onTime} on time, ${check.late} late, ${check.notReached} not reached; median ${check.medianIntervals ?? '—'} intervals.`,
    );
  }
  let siteOut: Record<string, unknown> = {};
  if (site) {
    const dir = mkdtempSync(join(tmpdir(), 'tideline-evaluate-site-'));
    try {
      const prepared = prepareSiteSet(dir, { seed: site.seed, reference: site.reference, good: site.good, perFault: site.perFault });
      const r = await runSiteCheck({ dir, prepared, log: (l) => console.error(`site: ${l}`) });
      console.log('\n' + siteMarkdown(r.figures, r));
      siteOut = { ...r.figures, site: { plan: site, version: r.version, approval: r.approval, timings: r.timings, outcomes: r.outcomes } };
    } catch (e) {
      // The site run goes through a real server and the public paths; when a step is refused the
      // figures cannot be measured. Say which step and why, and fail the run.
      console.error(`\nsite-style set: the run stopped: ${(e as Error).message}`);
      siteOut = { site_error: (e as Error).message };
      process.exitCode = 1;
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  }
  if (json) {
    const endpointCheck = check ? { early: check.early, withinBracket: check.withinBracketCount ?? null, earlyMaxIntervals: check.earlyMaxIntervals, onTime: check.onTime, late: check.late, notReached: check.notReached, medianIntervals: check.medianIntervals } : null;
    writeFileSync(json, JSON.stringify({ plan, model: { id: model.id, components: model.pca.nComponents, sha256: model.sha256, plsComponents: model.pls?.components ?? null, endpointCheck }, ...figures, ...siteOut }, null, 2));
    console.log(`figures written to ${json}`);
  }
}

if (process.argv[1] && import.meta.url === pathToFileURL(process.argv[1]).href) {
  main().catch((e) => {
    console.error(`evaluate: ${(e as Error).stack ?? e}`);
    process.exit(1);
  });
}
