/**
 * Screen texts that must agree with what they describe: Floor's progress, time to endpoint and the
 * alarms a tile names; Watch's PCs drawn for a standing alarm and its global/local limit names; the
 * tick labels of a log axis.
 */
import { describe, expect, it } from 'vitest';
import type { Alarm } from '../../core/api/rest.ts';
import type { MonitorResult } from '../../core/monitor/types.ts';
import { activeAlarmsText, alarmTitle, etaText, progressText, progressView, propertyProgressText, stallAlarm } from '../../web/src/views/floor-data.ts';
import { alarmedPcsOf, alarmLimitScope } from '../../web/src/views/watch-data.ts';
import { logTickLabels, tickLabels } from '../../web/src/charts/chart-options.ts';
import { appendResult, createLiveState } from '../../web/src/live/live-state.ts';
import { limitName } from '../../web/src/format/number-format.ts';

function alarm(o: Partial<Alarm>): Alarm {
  return {
    id: 'a1', unit: 'dryer-1', batch: 'b1', kind: 'envelope', key: 'pc3', state: 'active-unacknowledged', priority: 3, message: '', value: null, limit: null, active: true,
    raisedAt: 1000, clearedAt: null, acknowledgedAt: null, acknowledgedBy: null, acknowledgeComment: null, shelvedUntil: null, shelvedBy: null, shelveReason: null, seq: 4,
    ...o,
  } as Alarm;
}

describe('Floor tile texts', () => {
  it('names the alarms that stand, highest priority first', () => {
    const list = [alarm({ id: 'x', key: 'pc3', priority: 3 }), alarm({ id: 'y', kind: 't2', key: 't2', priority: 2 }), alarm({ id: 'z', unit: 'reactor-1', key: 'q', priority: 1 }), alarm({ id: 'w', key: 'pace', active: false, state: 'cleared-unacknowledged' })];
    expect(activeAlarmsText(list, 'dryer-1')).toBe('2 active alarms: Hotelling T² (P2 high), PC3 score (P3 medium)');
    expect(activeAlarmsText([alarm({})], 'dryer-1')).toBe('1 active alarm: PC3 score (P3 medium)');
    expect(activeAlarmsText(list, 'other')).toBeNull();
    expect(alarmTitle({ kind: 'stale', key: 'stale' })).toBe('no data from the analyzer');
  });
  it('gives no time to endpoint for a stalled batch, "due now" instead of zeros, and says when it is reached', () => {
    const pace = alarm({ kind: 'envelope', key: 'pace' });
    const zero = { median: 0, low: 0, high: 0 };
    expect(etaText({ state: 'nearing', etaMin: zero }, null)).toBe('due now by the golden batches, not yet reached');
    expect(etaText({ state: 'running', etaMin: { median: 300, low: 200, high: 420 } }, stallAlarm([pace], 'dryer-1', 'b1'))).toBe('stalled: no estimate while the batch is not progressing (pace alarm)');
    expect(stallAlarm([pace], 'dryer-1', 'b2')).toBeNull();
    expect(etaText({ state: 'running', etaMin: { median: 12, low: 8, high: 17 } }, null)).toBe('≈ 12 min (8.0 min – 17 min) to endpoint');
    expect(etaText({ state: 'done', etaMin: null }, null)).toBe('endpoint reached');
    expect(etaText({ state: 'running', etaMin: null }, null)).toBeNull();
  });
  it('does not call a batch at 100 % of the golden course while its endpoint is not reached', () => {
    expect(progressText(1, { state: 'nearing' }, 125)).toBe('at the end of the golden course · 2 h 05 min elapsed');
    expect(progressText(1, { state: 'done' }, 125)).toBe('100 % of golden course · 2 h 05 min elapsed');
    expect(progressText(0.42, { state: 'running' }, 30)).toBe('42 % of golden course · 30 min elapsed');
    expect(progressText(null, null, 3)).toBe('progress not judged · 3.0 min elapsed');
    // Progress and time to endpoint from one estimate: the reactor on its conversion axis is 92 % of
    // the golden course at 54 min while the ETA says 1 h 52 min: the elapsed share is 54 / (54 + 112).
    const eta = { median: 112, low: 101, high: 132 };
    expect(progressView({ progressFraction: 0.92, elapsedMin: 54 }, { state: 'running', etaMin: eta }, null)).toEqual({ text: '≈ 33 % of the expected time to endpoint · 54 min elapsed', share: 54 / 166 });
    expect(etaText({ state: 'running', etaMin: eta }, null)).toBe('≈ 1 h 52 min (1 h 41 min – 2 h 12 min) to endpoint');
    // a stalled batch: no share, no estimate, in both places
    expect(progressView({ progressFraction: 0.6, elapsedMin: 200 }, { state: 'running', etaMin: eta }, stallAlarm([alarm({ kind: 'envelope', key: 'pace' })], 'dryer-1', 'b1'))).toEqual({ text: 'not progressing (pace alarm): no estimate · 3 h 20 min elapsed', share: null });
    expect(progressView({ progressFraction: 1, elapsedMin: 125 }, { state: 'done', etaMin: null }, null)).toEqual({ text: 'endpoint reached · 2 h 05 min elapsed', share: 1 });
    expect(progressView({ progressFraction: 0.5, elapsedMin: 30 }, { state: 'nearing', etaMin: { median: 0.1, low: 0, high: 0.3 } }, null).text).toBe('endpoint due now by the golden batches · 30 min elapsed');
    // no ETA (no reference endpoint known): the golden-course fraction, named as such
    expect(progressView({ progressFraction: 0.42, elapsedMin: 30 }, { state: 'running', etaMin: null }, null)).toEqual({ text: '42 % of golden course · 30 min elapsed', share: 0.42 });
    expect(progressView(null, null, null)).toEqual({ text: 'progress not judged', share: null });
    // the property against its endpoint threshold, the direction from the criterion
    const crit = (met: boolean, value: number, threshold: number) => ({ criteria: [{ criterion: 'property', met, value, threshold, text: '' }] });
    expect(propertyProgressText({ value: 90.9, unit: '%' }, crit(false, 90.9, 99.1))).toBe('90.9 % · endpoint at ≥ 99.1 %');
    expect(propertyProgressText({ value: 3.2, unit: '% w/w' }, crit(false, 3.2, 1.99))).toBe('3.20 % w/w · endpoint at ≤ 1.99 % w/w');
    expect(propertyProgressText({ value: 1.9, unit: '% w/w' }, crit(true, 1.9, 1.99))).toBe('1.90 % w/w · endpoint at ≤ 1.99 % w/w');
    expect(propertyProgressText({ value: 1.9, unit: '% w/w' }, { criteria: [] })).toBe('1.90 % w/w');
  });
});

describe('Watch', () => {
  it('draws the PCs with an alarm open in this batch', () => {
    const list = [alarm({ key: 'pc3' }), alarm({ id: 'b', key: 'pc5', batch: 'earlier' }), alarm({ id: 'c', key: 'pc4', state: 'normal', active: false }), alarm({ id: 'd', kind: 't2', key: 't2' })];
    expect(alarmedPcsOf(list, 'b1')).toEqual([3]);
  });
  it('names an alarm limit that changes along the batch local, a constant one global', () => {
    const r = (seq: number, alarmT2: number): MonitorResult =>
      ({ seq, t: seq, elapsedMin: seq, progress: seq, progressFraction: 0, scores: [0], t2: 1, q: 0.1, combined: 0, limits: { t2: 10, q: 1, combined: 2, confidence: 0.99 }, localLimits: null,
        alarmLimits: { t2: alarmT2, q: 2, envelopeK: 3, confidence: 0.999 }, envelope: [], prediction: null, suspect: false, conditionChanges: [], activeConditions: [],
        endpoint: { state: 'running', criteria: [], combine: 'all', confirmCount: 0, confirmNeeded: 2, etaMin: null, doneAt: null }, events: [] }) as unknown as MonitorResult;
    const s = createLiveState();
    appendResult(s, r(1, 20));
    appendResult(s, r(2, 20));
    expect(alarmLimitScope(s, 'T²')).toBe('global');
    expect(alarmLimitScope(s, 'Q')).toBe('global');
    appendResult(s, r(3, 24));
    expect(alarmLimitScope(s, 'T²')).toBe('local');
    expect(limitName('Q', 0.99, 'global limit')).toBe('Q global limit (99 %)');
    expect(limitName('Q', 0.999, 'local alarm limit')).toBe('Q local alarm limit (99.9 %)');
  });
});

describe('log axis tick labels', () => {
  it('labels decades however uPlot splits a decade (1…9 within it look evenly spaced at first)', () => {
    const splits = [1e-7, 2e-7, 3e-7, 5e-7, 1e-6, 1e-5, 1e-4, 1e-3, 1e-2, 0.1, 1];
    expect(logTickLabels(splits)).toEqual(['10⁻⁷', '', '', '', '10⁻⁶', '10⁻⁵', '10⁻⁴', '10⁻³', '0.01', '0.1', '1']);
    // the linear labeller reads the same splits as an evenly spaced axis and prints zeros: the fault this replaces
    expect(tickLabels(splits).filter((x) => x === '0' || /^0\.0+$/.test(x)).length).toBeGreaterThan(0);
  });
  it('labels 2 and 5 where the axis spans two decades or less', () => {
    expect(logTickLabels([1e-4, 2e-4, 3e-4, 5e-4, 1e-3, 2e-3])).toEqual(['10⁻⁴', '2×10⁻⁴', '', '5×10⁻⁴', '10⁻³', '2×10⁻³']);
    expect(logTickLabels([1, 2, 5, 10, 20, 50, 100])).toEqual(['1', '2', '5', '10', '20', '50', '100']);
  });
});

describe('Model bench batch pickers', async () => {
  const { suspectReasons, endpointAsRun } = await import('../../web/src/views/bench/batch-suspect.ts');
  const model = { versionId: 'v', name: 'm', version: 1, sha256: 'x' };
  it('says why a finished batch may not be good', () => {
    expect(suspectReasons({ alarmCount: 0, endpointState: 'done', endReason: 'stopped after the endpoint', model, status: 'ended' })).toEqual([]);
    expect(suspectReasons({ alarmCount: 8, endpointState: 'running', endReason: 'stopped at the maximum batch time', model, status: 'ended' })).toEqual([
      '8 alarms raised while it ran',
      'endpoint not reached (running at the end)',
      'ended: stopped at the maximum batch time',
    ]);
    // a batch no model judged has no endpoint to miss
    expect(suspectReasons({ alarmCount: 0, endpointState: null, endReason: 'imported from a.csv by qa', model: null, status: 'ended' })).toEqual([]);
  });
  it('gives the endpoint as run', () => {
    expect(endpointAsRun({ model, endpointState: 'done', endpointAt: 60_000 * 52, startedAt: 0 })).toBe('reached at 52 min');
    expect(endpointAsRun({ model, endpointState: 'nearing', endpointAt: null, startedAt: 0 })).toBe('nearing, not reached');
    expect(endpointAsRun({ model: null, endpointState: null, endpointAt: null, startedAt: 0 })).toBe('not judged');
  });
});

describe('deploy preview', async () => {
  const { deployPreviewOf } = await import('../../web/src/views/bench/deploy-data.ts');
  it('reads what the server says a deployment changes, and leaves out what it cannot read', () => {
    const p = deployPreviewOf({
      unit: 'dryer-1',
      model: { versionId: 'v2', name: 'dryer-A', version: 2, sha256: 'x' },
      mismatches: [],
      comparison: {
        replaces: { versionId: 'v1', name: 'dryer-A', version: 1, sha256: 'y' },
        changes: [{ what: 'property model', before: 'moisture (% w/w), 3 latent variables', after: null }, { what: 5 }],
        warnings: ['The endpoint property moisture is dropped.'],
        dropsEndpointProperty: true,
      },
      needsEndpointLossConfirmation: true,
    });
    expect(p.replaces).toEqual({ name: 'dryer-A', version: 1 });
    expect(p.changes).toEqual([{ what: 'property model', before: 'moisture (% w/w), 3 latent variables', after: null }]);
    expect(p.needsEndpointLossConfirmation).toBe(true);
    expect(deployPreviewOf({ unit: 'reactor-1', mismatches: [{ what: 'axis', text: '256 points against 601' }], comparison: { replaces: null, changes: [], warnings: [] } }).mismatches).toEqual([{ what: 'axis', text: '256 points against 601' }]);
  });
});

describe('approval evidence', async () => {
  const { evidenceOf } = await import('../../web/src/views/bench/approval-evidence.tsx');
  it('reads the evidence and its warnings; null when the version was not evaluated', () => {
    const ev = evidenceOf({
      evaluationId: 'e', evaluatedAt: 5, confidence: 0.99, nominalRate: 0.01, heldOutGood: ['g1', 'g2'], excluded: [{ batch: 'f1', why: 'marked faulty' }], points: 794,
      t2: { name: 'T²', beyond: 117, points: 794, rate: 0.147, interval: [0.123, 0.174], farAbove: true, farBelow: false },
      q: { name: 'Q', beyond: 6, points: 794, rate: 0.0076, interval: [0.0028, 0.016], farAbove: false, farBelow: false },
      worst: { batch: 'g2', spectra: 397, beyond: 303, share: 0.763 }, alarmedGood: [{ batch: 'g2', alarms: 3, firstKind: 't2' }],
      endpoint: { reached: 1, of: 2, notReached: ['g2'] }, earlyCalls: { count: 0, text: null },
      warnings: [{ code: 't2-rate', blocking: true, text: '14.7 % of points beyond the T² limit against 1 % expected.' }], method: 'Clopper–Pearson',
    })!;
    expect(ev.rates.map((r) => [r.name, r.farAbove])).toEqual([['T²', true], ['Q', false]]);
    expect(ev.warnings.filter((w) => w.blocking)).toHaveLength(1);
    expect(ev.endpoint).toEqual({ reached: 1, of: 2, notReached: ['g2'] });
    expect(evidenceOf(null)).toBeNull();
  });
});
