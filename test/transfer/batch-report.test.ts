import { execFileSync, spawnSync } from 'node:child_process';
import { mkdirSync, writeFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { renderBatchReport, ADVISORY_TEXT, type BatchReportData } from '../../server/transfer/batch-report.ts';
import { chromiumPath, htmlToPdf } from '../../server/transfer/report-pdf.ts';
import { formatTick, lineChart, niceTicks } from '../../server/transfer/svg-chart.ts';
import type { MonitorResult } from '../../core/monitor/types.ts';
import { INTERNAL_CODE_WORDS } from '../../core/vocabulary/plain-names.ts';

function result(i: number): MonitorResult {
  const t2 = 2 + (i > 30 ? (i - 30) * 0.8 : 0);
  return {
    seq: i, t: 1767225600000 + i * 10_000, elapsedMin: i / 6, progress: i / 6, progressFraction: i / 60,
    scores: [10 - i * 0.3, 1 + (i > 30 ? 0.2 * (i - 30) : 0)], t2, q: 0.5 + 0.01 * i, combined: 1,
    limits: { t2: 11.3, q: 1.1, combined: 2, confidence: 0.99 }, localLimits: null, envelope: [], prediction: null,
    suspect: false, conditionChanges: [], activeConditions: [], events: [],
    endpoint: { state: 'running', criteria: [], combine: 'all', confirmCount: 0, confirmNeeded: 3, etaMin: null, doneAt: null },
  };
}

function data(): BatchReportData {
  const results = Array.from({ length: 60 }, (_, i) => result(i));
  const progress = Array.from({ length: 11 }, (_, i) => i);
  return {
    generatedAt: Date.UTC(2026, 0, 2), generatedBy: 'qa.reviewer', unitName: 'Fluid-bed dryer 1', results, property: null,
    batch: {
      id: 'D-0042', unit: 'dryer-1', product: 'granule-A', analyzer: 'nir-1', status: 'ended', startedAt: results[0]!.t, endedAt: results[59]!.t,
      endReason: 'operator', spectrumCount: 60, firstSeq: 0, lastSeq: 59, lastT: results[59]!.t, model: null, endpointState: 'done', endpointAt: null,
      alarmCount: 1, activeAlarms: 0, axis: [1000, 1010], latestResult: results[59]!, endpoint: null, endpointEvents: [], alarms: [], labValues: [],
    },
    model: null,
    envelope: { versionId: 'v', progressKind: 'time', progressUnit: 'min', progress, scores: [{ pc: 1, expected: progress.map((p) => 10 - 1.8 * p), lower: progress.map((p) => 8 - 1.8 * p), upper: progress.map((p) => 12 - 1.8 * p) }], local: null, limits: { t2: 11.3, q: 1.1, combined: null, confidence: 0.99 }, references: [] },
    alarms: [{ id: 'a1', unit: 'dryer-1', batch: 'D-0042', kind: 't2', key: 't2', state: 'normal', priority: 2, message: 'T² 14.2 above 99 % limit 11.3', value: 14.2, limit: 11.3, active: false, raisedAt: results[45]!.t, clearedAt: results[55]!.t, acknowledgedAt: results[47]!.t, acknowledgedBy: 'op.shift2', acknowledgeComment: 'checked probe window', shelvedUntil: null, shelvedBy: null, shelveReason: null, seq: 45, updatedAt: results[55]!.t }],
    endpointEvents: [],
    departure: { firstExitT: results[44]!.t, firstExitSeq: 44, firstExitWhat: 'T² above 99 % limit', window: { fromSeq: 44, toSeq: 59 }, alignedDeviation: [{ pc: 1, meanAbs: 0.4, maxAbs: 1.2 }], regions: [{ name: 'water-1450', from: 1400, to: 1500, assignment: 'O–H 1st overtone (water)', t2Share: 0.6, qShare: 0.7 }] },
  };
}

describe('batch report', () => {
  it('states the batch, model, alarms with acknowledgements, departure and the caution', () => {
    const html = renderBatchReport(data());
    for (const s of ['D-0042', 'Fluid-bed dryer 1', 'checked probe window', 'op.shift2', 'O–H 1st overtone (water)', 'none deployed', 'T² limit 99 %', 'Q limit 99 %']) expect(html).toContain(s);
    expect(html).toContain(ADVISORY_TEXT.replace(/’/g, '&#39;').slice(0, 20).replace('&#39;', '’'));
    expect(html).not.toMatch(/<script/i);
  });

  it("prints the version's endpoint rule, property model and leave-one-batch-out check, and a signed override", () => {
    const d = data();
    d.model = {
      versionId: 'v1', name: 'dryer-A', version: 3, product: 'granule-A', sha256: 'a'.repeat(64), status: 'approved', createdAt: 0, createdBy: 'mona',
      approvedAt: Date.UTC(2026, 0, 1), approvedBy: 'mona', approvalReason: 'checked', retiredAt: null, retiredBy: null, retireReason: null,
      referenceBatches: ['R1', 'R2'], components: 3, confidence: 0.99, deployedTo: ['dryer-1'],
      signatures: [{ signer: 'mona', signerFullName: 'Mona Owner', signerRole: 'model-owner', meaning: 'approved', modelSha256: 'a'.repeat(64), reason: 'checked', override: 'exhaust-temperature interlock stops the dryer', signedAt: Date.UTC(2026, 0, 1), auditSeq: 7 }],
    };
    d.evidence = {
      endpoint: { criteria: [{ kind: 'property', text: 'predicted moisture ≤ 1.990 % w/w (target 2.000 − margin 0.0100)', threshold: 1.99, method: 'target set by the model owner; margin z(0.7)·RMSECV' }], combine: 'all', confirm: 2, nearingMin: 10, minElapsedMin: 41.5, minElapsedMethod: "'auto': lower one-sided 99 % prediction bound", caution: 'Tideline advises' },
      property: {
        name: 'moisture', unit: '% w/w', target: 2, direction: 'below', components: 3, componentsRule: 'one-standard-error rule …', atSearchLimit: false, cvMethod: 'leave-one-batch-out: 2 folds',
        rmsecv: [0.3, 0.05, 0.02], rmsecv0: 1, bias: [0.1, 0.01, -0.004], nLabValues: 24, nBatchesWithLab: 2, nBatches: 2, batchesWithoutLab: [], calibrationRange: [1.2, 14], restrictedTo: null,
        extrapolation: { confidence: 0.99, t2Limit: 369, qLimit: 0.0061, t2Method: 't2-cv-quantile', qMethod: 'q-cv-quantile', method: '99.5 % sample quantile' },
      },
      endpointCheck: {
        method: 'leave-one-batch-out replay', early: 1, earlyWithinBracket: 1, earlyMaxIntervals: 2, earlyMaxMinutes: 0.333, late: 1, onTime: 0, notReached: 0, noEndpoint: 0, medianIntervals: 0.5,
        rows: [
          { batch: 'R1', knownIndex: 300, knownMin: 50, knownSource: 'lab', bracketMin: [45, 55], firedIndex: 298, firedMin: 49.667, intervals: -2, minutes: -0.333, propertyAtFire: 1.98, verdict: 'early', withinBracket: true },
          { batch: 'R2', knownIndex: 310, knownMin: 51.7, knownSource: 'marked', bracketMin: null, firedIndex: 313, firedMin: 52.2, intervals: 3, minutes: 0.5, propertyAtFire: 1.97, verdict: 'late', withinBracket: false },
        ],
      },
    };
    const html = renderBatchReport(d);
    for (const s of ["The model's endpoint rule and its check", 'predicted moisture ≤ 1.990 % w/w', 'margin z(0.7)·RMSECV', '1 early (at most 2 intervals, 0.333 min; 1 inside the lab bracket of their endpoint)', 'early (inside the lab bracket)', 'lab bracket 45–55', 'verdict', 'RMSECV / bias at that count', '0.02 / -0.004 % w/w', 'T² &gt; 369 or Q &gt; 0.0061', 'Approved with an override of the endpoint check', 'no endpoint before 41.5 min from the batch start', 'exhaust-temperature interlock stops the dryer', 'moisture (% w/w), endpoint target ≤ 2 % w/w', 'PC1 score (preprocessed absorbance units)']) expect(html).toContain(s);
    expect(html).not.toMatch(/target 2 below/);
  });

  it('states the end from the endpoint record: a stalled batch is never "stopped after the endpoint"', () => {
    const d = data();
    d.batch.endpointState = 'running';
    d.batch.endReason = 'stopped after the endpoint';
    d.model = { versionId: 'v1', name: 'reactor-C', version: 1, product: 'amide C', sha256: 'b'.repeat(64), status: 'approved', createdAt: 0, createdBy: 'x', approvedAt: 0, approvedBy: 'x', approvalReason: 'ok', retiredAt: null, retiredBy: null, retireReason: null, referenceBatches: [], components: 2, confidence: 0.99, deployedTo: [] };
    d.batch.model = { versionId: 'v1', name: 'reactor-C', version: 1, sha256: 'b'.repeat(64) } as never;
    const html = renderBatchReport(d);
    expect(html).toContain('ended without reaching the endpoint (endpoint running)');
    expect(html).toContain('Record disagrees:');
    expect(html).not.toMatch(/<td>End<\/td><td>[^<]*stopped after the endpoint/);
    // a reached endpoint keeps the reported words
    d.batch.endpointState = 'done';
    expect(renderBatchReport(d)).toContain('<td>End</td><td>stopped after the endpoint</td>');
  });

  it('prints no time after its generation time without saying so, and names its zone', () => {
    const d = data();
    expect(renderBatchReport(d)).toContain('All times are UTC');
    expect(renderBatchReport(d)).not.toContain('lie after its generation time');
    d.generatedAt = d.batch.startedAt - 1;
    expect(renderBatchReport(d)).toContain('lie after its generation time');
  });

  it('escapes text taken from the record', () => {
    const d = data();
    d.alarms[0]!.acknowledgeComment = '<img src=x onerror=alert(1)>';
    expect(renderBatchReport(d)).not.toContain('<img src=x');
  });

  it('chooses nice ticks (Heckbert 1990) and draws named limit lines', () => {
    expect(niceTicks(0, 9.3, 5)).toEqual([0, 2, 4, 6, 8, 10]);
    const svg = lineChart({ title: 't', xLabel: 'elapsed time (min)', yLabel: 'T²', series: [{ name: 's', x: [0, 1], y: [1, 2], color: '#000' }], limits: [{ name: 'T² limit 99 %', y: 1.5, color: '#D55E00' }] });
    expect(svg).toContain('T² limit 99 %');
    expect(svg).toContain('elapsed time (min)');
    // tick labels of small and large values read as numbers, not as codes ("5.0e-4")
    expect([1e-4, 5e-4, 2e-4, 0.002, 12, 2.5e6, -3e-5].map(formatTick)).toEqual(['10⁻⁴', '5 × 10⁻⁴', '2 × 10⁻⁴', '0.002', '12', '2.5 × 10⁶', '−3 × 10⁻⁵']);
  });

  const haveTools = chromiumPath() !== null && spawnSync('pdftotext', ['-v']).status === 0;
  it.skipIf(!haveTools)('prints to PDF whose text and page count check out (pdftotext, pdfinfo from poppler-utils)', async () => {
    const pdf = await htmlToPdf(renderBatchReport(data()), { title: 'D-0042' });
    mkdirSync('test-results', { recursive: true });
    writeFileSync('test-results/report-unit.pdf', pdf);
    const text = execFileSync('pdftotext', ['-layout', 'test-results/report-unit.pdf', '-']).toString();
    expect(text).toContain('Batch report');
    expect(text).toContain('D-0042');
    expect(text).toContain('Tideline advises');
    // no internal code word reaches the reader (each has a plain name in core/vocabulary/plain-names.ts)
    for (const w of INTERNAL_CODE_WORDS) expect(text, w).not.toMatch(new RegExp(`(?<![\\w-])${w}(?![\\w-])`));
    const info = execFileSync('pdfinfo', ['test-results/report-unit.pdf']).toString();
    const pages = Number(/Pages:\s+(\d+)/.exec(info)![1]);
    expect(pages).toBeGreaterThanOrEqual(1);
    expect(pages).toBeLessThanOrEqual(6);
  });
  if (!haveTools) it('PDF printing was skipped: Debian chromium or poppler-utils (pdftotext) is not installed', () => expect(haveTools).toBe(false));
});
