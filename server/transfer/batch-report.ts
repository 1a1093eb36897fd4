/**
 * The batch report: one self-contained HTML page (inline SVG charts, print CSS) that QA can file and
 * that headless Chromium prints to PDF. It states what judged the batch (model version and hash), how
 * it went (score path on the golden envelope, T² and Q against their limits), what was raised and who
 * acknowledged it, when the endpoint was called and signalled, where the batch departed from the golden
 * batches and which wavelength regions drove it — and the advisory caution.
 */
import type { Alarm, BatchDetail, EndpointCheckView, EndpointEventRecord, EndpointRuleView, ModelEnvelopeView, ModelVersionSummary, PropertyModelView } from '../../core/api/rest.ts';
import type { MonitorResult } from '../../core/monitor/types.ts';
import { barChart, escapeXml as esc, lineChart, OKABE_ITO } from './svg-chart.ts';
import { alarmName, alarmStateName, assignmentName, criterionName, endpointStateName, plainText } from '../../core/vocabulary/plain-names.ts';
import { batchEndStatement } from '../../core/monitor/batch-end.ts';
import { RECEIVED_DIFFERS_MS, REPORT_TIME_ZONE, formatReportTime, receivedDiffers } from '../../core/vocabulary/report-time.ts';

export const ADVISORY_TEXT =
  'Tideline advises. An endpoint signal or alarm must be used within the site’s validated control strategy; ' +
  'interlocks and operating procedures decide, and a model must be validated under the site’s quality system ' +
  'before it is used for release decisions.';

export interface ReportRegion {
  name: string;
  from: number;
  to: number;
  assignment: string;
  /** Share of the summed contribution over the departure window, 0…1. */
  t2Share: number;
  qShare: number;
}

export interface ReportDeparture {
  /** Time (ms) the batch first left the golden batches by the alarm rule (on-delay), null when it never did. */
  firstExitT: number | null;
  firstExitSeq: number | null;
  /** What left: 'pc1 above', 'Q above 99 % limit' … */
  firstExitWhat: string | null;
  /** The first single point outside the envelope or a limit before that (may be a suspect scan). */
  firstOutside?: { t: number; seq: number; what: string } | null;
  window: { fromSeq: number; toSeq: number } | null;
  regions: ReportRegion[];
  /** Mean |deviation| from the golden mean after DTW alignment, per PC. */
  alignedDeviation: { pc: number; meanAbs: number; maxAbs: number }[];
}

export interface BatchReportData {
  generatedAt: number;
  generatedBy: string;
  /** The audit trail's head when the report was made: printed so a filed report anchors the trail. */
  auditAnchor?: { seq: number; hash: string } | null;
  batch: BatchDetail;
  unitName: string;
  model: ModelVersionSummary | null;
  envelope: ModelEnvelopeView | null;
  results: MonitorResult[];
  alarms: Alarm[];
  endpointEvents: EndpointEventRecord[];
  departure: ReportDeparture | null;
  /** Property name and unit when the model predicts one (e.g. moisture, % w/w). */
  property: { name: string; unit: string } | null;
  /** Set when the batch comes from the demo's simulator: how much faster than real time it was replayed. */
  simulation?: { speedUp: number | null; note: string } | null;
  /** The model version's evidence (version detail): its endpoint rule, property model and endpoint check. */
  evidence?: { endpoint: EndpointRuleView | null; property: PropertyModelView | null; endpointCheck: EndpointCheckView | null } | null;
}

/** The version's endpoint rule, property model and leave-one-batch-out check, as printed. */
function evidenceSection(d: BatchReportData): string {
  const ev = d.evidence;
  if (!d.model) return '';
  if (!ev) return '<h2>The model\'s endpoint rule and its check</h2><p class="empty">Not available for this model version.</p>';
  const parts: string[] = ['<h2>The model\'s endpoint rule and its check</h2>'];
  if (ev.endpoint) {
    const minText = ev.endpoint.minElapsedMin > 0 ? `; no endpoint before ${num(ev.endpoint.minElapsedMin, 4)} min from the batch start (${ev.endpoint.minElapsedMethod})` : '';
    parts.push(`<p>Rule: ${ev.endpoint.combine === 'all' ? 'all' : 'any'} of the criteria below, confirmed over ${ev.endpoint.confirm} spectra${esc(plainText(minText))}.</p>`);
    parts.push(table(['criterion', 'threshold', 'how it was obtained'], ev.endpoint.criteria.map((c) => [`${criterionName(c.kind)}: ${plainText(c.text)}`, num(c.threshold, 4), plainText(c.method)])));
  }
  const p = ev.property;
  if (p) {
    const a = p.components;
    parts.push(
      table(['property model', 'value'], [
        ['property', `${p.name} (${p.unit})${p.target !== null ? `, endpoint target ${p.direction === 'above' ? '≥' : '≤'} ${num(p.target, 4)} ${p.unit}` : ''}`],
        ['latent variables', `${a} — ${plainText(p.componentsRule)}`],
        ['RMSECV / bias at that count', `${num(p.rmsecv[a - 1], 3)} / ${num(p.bias[a - 1], 3)} ${p.unit} (${plainText(p.cvMethod)})`],
        ['lab method sd (stated)', p.labSd === null || p.labSd === undefined ? 'not stated: the automatic margin takes RMSECV whole, lab error included' : `${num(p.labSd, 3)} ${p.unit}: taken out of RMSECV for the automatic margin`],
        ['lab values', `${p.nLabValues} on ${p.nBatchesWithLab} of ${p.nBatches} reference batches, ${num(p.calibrationRange[0], 4)}–${num(p.calibrationRange[1], 4)} ${p.unit}${p.batchesWithoutLab.length ? `; none on ${p.batchesWithoutLab.join(', ')}` : ''}`],
        ['outside its calibration when', `T² > ${num(p.extrapolation.t2Limit, 4)} or Q > ${num(p.extrapolation.qLimit, 4)} (${num(p.extrapolation.confidence * 100, 4)} %): ${plainText(p.extrapolation.method)}`],
      ]),
    );
  }
  const c = ev.endpointCheck;
  if (c) {
    parts.push(
      `<p>Leave-one-batch-out check on the reference batches: ${c.early} early${c.early ? ` (at most ${c.earlyMaxIntervals} intervals, ${num(c.earlyMaxMinutes, 3)} min${c.withinBracketCount === undefined ? `; ${c.earlyWithinBracket ?? 0} inside the lab bracket of their endpoint` : ''})` : ''}, ${c.withinBracketCount !== undefined ? `${c.withinBracketCount} within the lab bracket (neither early nor late as far as the lab values can tell), ` : ''}${c.onTime} on time, ${c.late} late, ${c.notReached} not reached, ${c.noEndpoint} without a known endpoint; median ${c.medianIntervals === null ? '—' : `${num(c.medianIntervals, 3)} intervals`} from the known endpoint.</p>`,
    );
    parts.push(
      table(
        ['reference batch', 'known endpoint (min)', 'from', 'rule reached done (min)', 'intervals', 'minutes', 'verdict'],
        c.rows.map((r) => [r.batch, r.knownMin === null ? (r.notBefore ? `none; not before ${num(r.notBefore.min, 4)} (${r.notBefore.text})` : '—') : `${num(r.knownMin, 4)}${r.bracketMin ? ` (lab bracket ${num(r.bracketMin[0], 4)}–${num(r.bracketMin[1], 4)})` : ''}`, r.knownSource ?? '—', r.firedMin === null ? 'not reached' : num(r.firedMin, 4), r.intervals ?? '—', r.minutes === null ? '—' : num(r.minutes, 3), r.verdict === 'within bracket' ? 'within the lab bracket' : r.withinBracket ? `${r.verdict} (inside the lab bracket)` : r.verdict]),
      ),
    );
    parts.push(`<p class="small">${esc(plainText(c.method))}</p>`);
  } else parts.push('<p class="empty">This version carries no endpoint check (built before it was made).</p>');
  const overrides = (d.model.signatures ?? []).filter((s) => s.override);
  for (const o of overrides) parts.push(`<p><strong>Approved with an override of the endpoint check</strong> by ${esc(o.signerFullName)} (${esc(o.signer)}), ${esc(utc(o.signedAt))}: “${esc(o.override!)}”</p>`);
  return parts.join('\n');
}

/** The listed regions and one row for the rest, so each share column adds up to 100 %. */
function regionRows(regions: ReportRegion[]): string[][] {
  const rows = regions.map((r) => [`${nm(r.from)}–${nm(r.to)}`, assignmentName(r.assignment), `${num(r.t2Share * 100, 3)} %`, `${num(r.qShare * 100, 3)} %`]);
  if (regions.length === 0) return rows;
  const t2 = Math.max(0, 1 - regions.reduce((a, r) => a + r.t2Share, 0));
  const q = Math.max(0, 1 - regions.reduce((a, r) => a + r.qShare, 0));
  if (t2 >= 5e-4 || q >= 5e-4) rows.push(['other regions', '', `${num(t2 * 100, 3)} %`, `${num(q * 100, 3)} %`]);
  return rows;
}

const utc = formatReportTime;
/** A process time, with the server's receipt time beside it where the two differ by more than RECEIVED_DIFFERS_MS. */
const at = (t: number | null | undefined, received?: number | null) => {
  const r = receivedDiffers(t, received);
  return r === null ? utc(t) : `${utc(t)} (received ${utc(r)})`;
};
const nm = (v: number) => v.toFixed(0);
const num = (v: number | null | undefined, digits = 3) => (v === null || v === undefined || !Number.isFinite(v) ? '—' : Number(v.toPrecision(digits)).toString());

function table(head: string[], rows: (string | number)[][]): string {
  if (rows.length === 0) return '<p class="empty">None.</p>';
  return `<table><thead><tr>${head.map((h) => `<th>${esc(h)}</th>`).join('')}</tr></thead><tbody>${rows
    .map((r) => `<tr>${r.map((c) => `<td>${esc(String(c))}</td>`).join('')}</tr>`)
    .join('')}</tbody></table>`;
}

/** Render the report. Pure: all data, including the generation time, are passed in. */
export function renderBatchReport(d: BatchReportData): string {
  const b = d.batch;
  const res = d.results;
  const elapsed = res.map((r) => r.elapsedMin);
  const conf = res[0]?.limits.confidence ?? d.envelope?.limits.confidence ?? null;
  const confText = conf === null ? '' : `${num(conf * 100, 4)} %`;
  const charts: string[] = [];

  // Score paths on the golden envelope (first two PCs), on the envelope's progress axis.
  const pcs = d.envelope ? d.envelope.scores.slice(0, 2) : [];
  const xKey = d.envelope?.progressKind === 'indicator' ? 'progress' : 'elapsedMin';
  const xLabel = d.envelope?.progressKind === 'indicator' ? `progress (${d.envelope.progressUnit})` : 'elapsed time (min)';
  for (const sc of pcs) {
    charts.push(
      lineChart({
        // The score is the preprocessed spectrum's projection on the model's loading: it has the
        // spectrum's units after preprocessing (absorbance, or its derivative), not a bare "t1".
        title: `PC${sc.pc} score on the golden envelope (the spectrum's projection on PC${sc.pc})`,
        xLabel,
        yLabel: `PC${sc.pc} score (preprocessed absorbance units)`,
        bands: [{ name: 'golden envelope', x: d.envelope!.progress, lower: sc.lower, upper: sc.upper, color: OKABE_ITO.skyBlue }],
        series: [
          { name: 'golden mean', x: d.envelope!.progress, y: sc.expected, color: OKABE_ITO.blue, dash: '5 3' },
          { name: `batch ${b.id}`, x: res.map((r) => (xKey === 'progress' ? r.progress : r.elapsedMin)), y: res.map((r) => r.scores[sc.pc - 1] ?? null), color: OKABE_ITO.vermillion, width: 2 },
        ],
        markersX: d.departure?.firstExitT ? [{ name: 'first exit', x: xOf(res, d.departure.firstExitSeq, xKey), color: OKABE_ITO.black }] : [],
      }),
    );
  }
  if (res.length > 0) {
    charts.push(
      lineChart({
        title: 'Hotelling T²',
        xLabel: 'elapsed time (min)',
        yLabel: 'T² (dimensionless)',
        logY: true,
        series: [{ name: 'T²', x: elapsed, y: res.map((r) => r.t2), color: OKABE_ITO.blue, width: 1.5 }],
        limits: [{ name: `T² limit ${confText}`, y: res[0]!.limits.t2, color: OKABE_ITO.vermillion }],
      }),
      lineChart({
        title: 'Q (SPE)',
        xLabel: 'elapsed time (min)',
        yLabel: 'Q (squared residual)',
        logY: true,
        series: [{ name: 'Q', x: elapsed, y: res.map((r) => r.q), color: OKABE_ITO.green, width: 1.5 }],
        limits: [{ name: `Q limit ${confText}`, y: res[0]!.limits.q, color: OKABE_ITO.vermillion }],
      }),
    );
    if (d.property && res.some((r) => r.prediction)) {
      charts.push(
        lineChart({
          title: `Predicted ${d.property.name}`,
          xLabel: 'elapsed time (min)',
          yLabel: `${d.property.name} (${d.property.unit})`,
          series: [{ name: `predicted ${d.property.name}`, x: elapsed, y: res.map((r) => r.prediction?.value ?? null), color: OKABE_ITO.purple, width: 1.5 }],
          limits: d.evidence?.property?.target !== null && d.evidence?.property?.target !== undefined
            ? [{ name: `target ${num(d.evidence.property.target, 4)} ${d.property.unit}`, y: d.evidence.property.target, color: OKABE_ITO.black, dash: '2 3' }]
            : [],
        }),
      );
    }
  }

  const end = b.end ?? batchEndStatement({ status: b.status, reportedReason: b.reportedEndReason !== undefined ? b.reportedEndReason : b.endReason, endpointState: b.endpointState, judged: b.model !== null });
  // Every time printed below, to check it against the generation time: a time after it means the
  // analyzer's clock runs ahead of the server's, and the report says so.
  const shown: number[] = [b.startedAt, b.endedAt ?? NaN, b.lastT ?? NaN, ...d.endpointEvents.map((e) => e.t), ...d.alarms.flatMap((a) => [a.raisedSpectrumT ?? a.raisedAt, a.spectrumT ?? NaN])].filter((t) => Number.isFinite(t));
  const ahead = shown.filter((t) => t > d.generatedAt);
  const done = d.endpointEvents.find((e) => e.to === 'done');
  const signalled = d.endpointEvents.find((e) => e.to === 'signalled');
  const endpointCriteria = b.endpoint?.criteria ?? [];
  const dep = d.departure;
  const regionsChart =
    dep && dep.regions.length
      ? barChart({
          title: 'Wavelength regions that drove T² and Q over the departure window',
          valueLabel: 'share of the summed contribution (%)',
          rows: dep.regions.map((r) => ({ label: `${nm(r.from)}–${nm(r.to)} nm · ${assignmentName(r.assignment)}`, values: [100 * r.t2Share, 100 * r.qShare] })),
          series: [
            { name: 'T² share', color: OKABE_ITO.blue, pattern: 'solid' },
            { name: 'Q share', color: OKABE_ITO.vermillion, pattern: 'hatched' },
          ],
          format: (v) => `${Number(v.toPrecision(3))} %`,
        })
      : '';

  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8">
<title>Batch report ${esc(b.id)} — Tideline</title>
<style>
  body { font-family: "DejaVu Sans", Arial, sans-serif; font-size: 11pt; color: #111; margin: 24px; }
  h1 { font-size: 18pt; margin: 0 0 4px; } h2 { font-size: 13pt; border-bottom: 1px solid #999; margin-top: 22px; }
  table { border-collapse: collapse; width: 100%; margin: 6px 0; } th, td { border: 1px solid #bbb; padding: 3px 6px; text-align: left; font-size: 9.5pt; }
  th { background: #eee; } .meta td:first-child { width: 28%; font-weight: bold; }
  .caution { border: 2px solid #D55E00; padding: 8px 10px; margin: 12px 0; background: #fff7f0; }
  .empty { color: #555; font-style: italic; } .chart { page-break-inside: avoid; margin: 8px 0; }
  .small { font-size: 8.5pt; color: #333; }
  .hash { font-family: "DejaVu Sans Mono", monospace; font-size: 8.5pt; word-break: break-all; }
  @media print { body { margin: 0; } h2 { page-break-after: avoid; } }
</style></head><body>
<h1>Batch report — ${esc(b.id)}</h1>
<p>Unit ${esc(d.unitName)} (${esc(b.unit)}) · product ${esc(b.product)} · generated ${esc(utc(d.generatedAt))} by ${esc(d.generatedBy)}</p>
<p class="small">All times are ${REPORT_TIME_ZONE}. Process times (batch start and end, spectra, endpoint, alarms raised and cleared) are the analyzer's time of the spectrum; the server's time of receipt is added in brackets only where it differs by more than ${RECEIVED_DIFFERS_MS / 1000} s. The times people acted (acknowledged, approved, this report generated) are the server's clock.</p>
${d.simulation ? `<div class="caution"><strong>Simulated data.</strong> ${esc(d.simulation.note)}${d.simulation.speedUp ? ` Replayed ${num(d.simulation.speedUp, 4)}× faster than real time, each batch dated so that its last spectrum fell at the wall clock when it was sent.` : ''}</div>` : ''}
${ahead.length ? `<div class="caution"><strong>Clock.</strong> ${ahead.length} process time${ahead.length === 1 ? '' : 's'} in this report lie after its generation time (latest ${esc(utc(Math.max(...ahead)))}): the analyzer's clock runs ahead of this server's. Check the analyzer's time synchronisation before relying on these times.</div>` : ''}
<div class="caution"><strong>Caution.</strong> ${esc(ADVISORY_TEXT)}</div>
<h2>Batch and model</h2>
<table class="meta"><tbody>
<tr><td>Batch</td><td>${esc(b.id)} (${b.status === 'open' ? 'running' : 'ended'})</td></tr>
<tr><td>Started / ended</td><td>${esc(utc(b.startedAt))} / ${esc(utc(b.endedAt))}</td></tr>
<tr><td>End</td><td>${esc(end.text)}${end.disagreement ? `<br><strong>Record disagrees:</strong> ${esc(end.disagreement)}.` : ''}</td></tr>
<tr><td>Analyzer</td><td>${esc(b.analyzer)} · ${b.spectrumCount} spectra, seq ${b.firstSeq ?? '—'}…${b.lastSeq ?? '—'}${b.suspectCount !== undefined ? ` · ${b.suspectCount} suspect scan${b.suspectCount === 1 ? '' : 's'} (single points beyond a limit that raised no alarm on their own)` : ''}${b.unjudgedCount ? ` · ${b.unjudgedCount} spectr${b.unjudgedCount === 1 ? 'um' : 'a'} not judged (too damaged to judge)` : ''}</td></tr>
<tr><td>Model</td><td>${d.model ? `${esc(d.model.name)} version ${d.model.version} (${esc(d.model.status)}) · ${d.model.components} PCs · limits at ${num(d.model.confidence * 100, 4)} %` : 'none deployed: the batch was recorded but not judged'}</td></tr>
<tr><td>Model SHA-256</td><td class="hash">${esc(d.model?.sha256 ?? '—')}</td></tr>
<tr><td>Approved</td><td>${d.model?.approvedAt ? `${esc(utc(d.model.approvedAt))} by ${esc(d.model.approvedBy ?? '?')}: ${esc(d.model.approvalReason ?? '')}` : 'not approved'}</td></tr>
<tr><td>Reference batches</td><td>${esc(d.model?.referenceBatches.join(', ') ?? '—')}</td></tr>
</tbody></table>
<h2>Endpoint</h2>
<table class="meta"><tbody>
<tr><td>Endpoint state at the end</td><td>${esc(endpointStateName(b.endpointState))}</td></tr>
<tr><td>Endpoint reached</td><td>${done ? `${esc(at(done.t, done.recordedAt))} at seq ${done.seq}: ${esc(plainText(done.reason))}` : 'not reached'}</td></tr>
<tr><td>Signalled to the control system</td><td>${signalled ? `${esc(utc(signalled.t))} (server time the signal went out): ${esc(plainText(signalled.reason))}` : 'not signalled'}</td></tr>
</tbody></table>
${table(['criterion', 'met', 'value', 'threshold', 'detail'], endpointCriteria.map((c) => [criterionName(c.criterion), c.met ? 'yes' : 'no', num(c.value), num(c.threshold), plainText(c.text)]))}
${table(['time', 'seq', 'from', 'to', 'reason'], d.endpointEvents.map((e) => [e.to === 'signalled' ? `${utc(e.t)} (server)` : at(e.t, e.recordedAt), e.seq, endpointStateName(e.from), endpointStateName(e.to), plainText(e.reason)]))}
${evidenceSection(d)}
<h2>Trajectory and limits</h2>
${charts.map((c) => `<div class="chart">${c}</div>`).join('\n') || '<p class="empty">No monitor results were recorded for this batch.</p>'}
<h2>Alarms</h2>
${table(
  ['raised', 'alarm', 'priority', 'state', 'message', 'cleared', 'acknowledged', 'shelved'],
  d.alarms.map((a) => [
    at(a.raisedSpectrumT ?? a.raisedAt, a.raisedSpectrumT ? a.raisedAt : null),
    alarmName(a.key),
    `P${a.priority}`,
    alarmStateName(a.state),
    plainText(a.message),
    a.active ? 'not cleared' : a.clearedAt === null ? '—' : a.spectrumT ? at(a.spectrumT, a.clearedAt) : `${utc(a.clearedAt)} (server)`,
    a.acknowledgedAt ? `${utc(a.acknowledgedAt)} by ${a.acknowledgedBy ?? '?'}${a.acknowledgeComment ? ` — ${a.acknowledgeComment}` : ''}` : 'not acknowledged',
    a.shelvedUntil ? `until ${utc(a.shelvedUntil)} by ${a.shelvedBy ?? '?'}: ${a.shelveReason ?? ''}` : '—',
  ]),
)}
<h2>Departure from the golden batches</h2>
${
  dep
    ? `<p>${dep.firstExitT ? `First left the golden batches (alarm rule) at ${esc(utc(dep.firstExitT))} (seq ${dep.firstExitSeq}): ${esc(plainText(dep.firstExitWhat ?? ''))}.` : 'The batch never left the golden batches by the alarm rule: no departure window.'}${dep.firstOutside ? ` A single point was outside at ${esc(utc(dep.firstOutside.t))} (seq ${dep.firstOutside.seq}): ${esc(plainText(dep.firstOutside.what))} (possibly a suspect scan).` : ''}</p>
${table(['PC', 'mean |deviation| after DTW', 'max |deviation|'], dep.alignedDeviation.map((a) => [`PC${a.pc}`, num(a.meanAbs), num(a.maxAbs)]))}
${dep.window ? `<p>Departure window: seq ${dep.window.fromSeq}…${dep.window.toSeq}.</p>` : ''}
${dep.regions.length ? `${table(['region (nm)', 'assignment', 'share of T²', 'share of Q'], regionRows(dep.regions))}
<p>Shares over the departure window: of T² the region's sum of |T² contribution| (contributions can be negative), of Q its sum of squared residuals; the last row holds the regions not listed, so each column adds up to 100 %.</p>` : ''}
${regionsChart ? `<div class="chart">${regionsChart}</div>` : ''}`
    : '<p class="empty">No departure analysis (no model, or no results).</p>'
}
<h2>Record</h2>
<p>Raw spectra and per-spectrum results are kept unchanged in the Tideline record; this report is derived from them. Band assignments are common practice (Workman &amp; Weyer, Practical Guide to Interpretive Near-Infrared Spectroscopy, 2008).</p>
${
  d.auditAnchor
    ? `<p>Audit trail anchor when this report was generated (record ${d.auditAnchor.seq} and its SHA-256):</p>
<p class="hash">${esc(`${d.auditAnchor.seq}:${d.auditAnchor.hash}`)}</p>
<p class="small">A filed report keeps the trail honest: <code>npm run tideline -- audit verify --anchor ${esc(`${d.auditAnchor.seq}:${d.auditAnchor.hash}`)}</code> (or <code>--anchor-file</code> with this report's text) fails if records were removed from the end of the trail or the trail was rewritten since.</p>`
    : '<p class="small">No audit trail anchor: the audit trail was empty or not installed when this report was generated.</p>'
}
</body></html>
`;
}

function xOf(res: MonitorResult[], seq: number | null, key: 'progress' | 'elapsedMin'): number {
  const r = res.find((x) => x.seq === seq);
  return r ? r[key] : NaN;
}
