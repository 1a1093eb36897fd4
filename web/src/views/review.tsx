/** Review: a finished batch against the golden envelope, its departure, contributions, comparison, export. */
import { useMemo, useState } from 'preact/hooks';
import type uPlot from 'uplot';
import type { BatchDetail, ModelEnvelopeView, ResultRecord } from '../../../core/api/rest.ts';
import { api } from '../api/endpoints.ts';
import { EndpointHolds } from './endpoint-holds.tsx';
import { AlarmList } from './alarm-list.tsx';
import { get } from '../api/http.ts';
import { ApiError } from '../api/problem.ts';
import type { ComparisonResponse } from './review-data.ts';
import type { RegionContribution } from '../../../core/compare/compare-batch.ts';
import { useAsync } from '../components/use-async.ts';
import { Advisory, Badge, Empty, ErrorBox, Loading } from '../components/status.tsx';
import { Chart } from '../charts/chart.tsx';
import { contributionOptions, scoreChartOptions, statChartOptions } from '../charts/chart-options.ts';
import { progressLabel, scoreBand } from './watch-data.ts';
import { alignedLine, comparisonWindow, departureWindow, endpointRecordText, meanContributions, sampleSeqs, scanCountsText, timeline } from './review-data.ts';
import { topShares } from './contribution-data.ts';
import { RegionShareTable } from './region-share-table.tsx';
import { PropertyOverTime } from './review-property.tsx';
import { LabValues } from './review-lab.tsx';
import { batchLab, labPoints, type BatchLab } from './review-lab-data.ts';
import type { Me } from '../api/session.ts';
import type { TimelineEvent } from './review-data.ts';
import { contributionSeries } from './contribution-data.ts';
import { ENDPOINT_WORDS } from '../format/status-words.ts';
import { dateTime, limitName, minutes, sig } from '../format/number-format.ts';
import { COMPARE_STYLES, STYLE } from '../theme/palette.ts';
import type { SeriesStyle } from '../theme/palette.ts';
import { href } from '../router.ts';

async function allResults(batch: string): Promise<ResultRecord[]> {
  const out: ResultRecord[] = [];
  let from: number | undefined;
  for (let page = 0; page < 50; page++) {
    const r = await api.results(batch, { fromSeq: from, limit: 5000 });
    out.push(...r.items);
    if (r.nextSeq === null || r.items.length === 0) break;
    from = r.nextSeq;
  }
  return out;
}

/** The batch's lab values; null when this server has no lab-values route. */
async function labValuesOf(batch: string): Promise<BatchLab | null> {
  try {
    return batchLab(await get<unknown>(`/api/batches/${encodeURIComponent(batch)}/lab-values`));
  } catch (e) {
    if (e instanceof ApiError && e.status === 404 && /no API route/.test(e.problem.detail ?? '')) return null;
    throw e;
  }
}

async function comparison(batch: string): Promise<ComparisonResponse | null> {
  try {
    return await get<ComparisonResponse>(`/api/batches/${encodeURIComponent(batch)}/comparison`);
  } catch (e) {
    if (e instanceof ApiError && e.status === 404) return null;
    throw e;
  }
}

export function Review({ batch, compare, me = null }: { batch: string | null; compare: string[]; me?: Me | null }) {
  return (
    <section class="view review">
      <header class="view-head no-print">
        <h1>Review</h1>
      </header>
      <div class="review-grid">
        <aside class="no-print">
          <BatchPicker current={batch} compare={compare} />
        </aside>
        <div>{batch ? <BatchReview key={batch} id={batch} compare={compare} me={me} /> : <Empty>Pick a finished batch on the left.</Empty>}</div>
      </div>
    </section>
  );
}

function BatchPicker({ current, compare }: { current: string | null; compare: string[] }) {
  const batches = useAsync(() => api.batches({ status: 'ended', limit: 500 }), []);
  const [filter, setFilter] = useState('');
  const items = (batches.data?.items ?? []).filter((b) => !filter || `${b.id} ${b.unit} ${b.product}`.toLowerCase().includes(filter.toLowerCase()));
  return (
    <div class="panel">
      <h2>Finished batches</h2>
      <input type="search" placeholder="filter by batch, unit, product" value={filter} onInput={(e) => setFilter((e.target as HTMLInputElement).value)} aria-label="filter batches" />
      {batches.loading && !batches.data && <Loading what="batches" />}
      {batches.error && <ErrorBox message={batches.error} onRetry={batches.reload} />}
      {batches.data && items.length === 0 && <p class="muted">No finished batches.</p>}
      <ul class="batch-list">
        {items.map((b) => (
          <li key={b.id} class={b.id === current ? 'current' : ''}>
            <a href={href({ view: 'review', batch: b.id, compare: compare.filter((c) => c !== b.id) })} data-testid={`review-${b.id}`}>
              <b>{b.id}</b>
              <br />
              <span class="muted">
                {b.unit} · {b.product}
              </span>
              <br />
              <span class="small">
                {dateTime(b.startedAt)} · {b.alarmCount ? `${b.alarmCount} alarm${b.alarmCount === 1 ? '' : 's'}` : 'no alarms'} · {endpointRecordText(b).text}
                {b.suspectCount || b.unjudgedCount ? ` · ${scanCountsText(b)}` : ''}
              </span>
            </a>
            {current && b.id !== current && (
              <label class="small">
                <input
                  type="checkbox"
                  checked={compare.includes(b.id)}
                  onChange={(e) => {
                    const next = (e.target as HTMLInputElement).checked ? [...compare, b.id].slice(0, COMPARE_STYLES.length - 1) : compare.filter((c) => c !== b.id);
                    location.hash = href({ view: 'review', batch: current, compare: next });
                  }}
                />{' '}
                compare
              </label>
            )}
          </li>
        ))}
      </ul>
    </div>
  );
}

function BatchReview({ id, compare, me }: { id: string; compare: string[]; me: Me | null }) {
  const detail = useAsync(() => api.batch(id), [id]);
  const results = useAsync(() => allResults(id), [id]);
  const versionId = detail.data?.model?.versionId ?? null;
  const env = useAsync(() => (versionId ? api.envelope(versionId) : Promise.resolve(null)), [versionId]);
  const cmp = useAsync(() => comparison(id), [id]);
  const version = useAsync(() => (versionId ? api.modelVersion(versionId) : Promise.resolve(null)), [versionId]);
  const lab = useAsync(() => labValuesOf(id), [id]);
  const others = useAsync(() => Promise.all(compare.map(async (c) => ({ id: c, results: await allResults(c) }))), [compare.join(',')]);
  const d = detail.data;
  if (detail.loading && !d) return <Loading what={`batch ${id}`} />;
  if (detail.error) return <ErrorBox message={detail.error} onRetry={detail.reload} />;
  if (!d) return null;
  const rs = results.data ?? [];
  const c = cmp.data?.comparison ?? null;
  const predicted = rs.find((r) => r.prediction)?.prediction ?? null;
  const win = (c ? comparisonWindow(c, rs) : null) ?? (c && !c.departureWindow ? null : departureWindow(rs));
  return (
    <div class="batch-review" data-testid="batch-review">
      <div class="panel">
        <div class="panel-head">
          <h2>
            Batch {d.id} <span class="sub">{d.unit} · {d.product}</span>
          </h2>
          <span class="no-print">
            <a class="btn small" href={api.exportCsvUrl(d.id, 'results')} download>
              Export results CSV
            </a>{' '}
            <a class="btn small" href={api.exportCsvUrl(d.id, 'spectra')} download>
              Export spectra CSV
            </a>{' '}
            <a class="btn small" href={`/api/batches/${encodeURIComponent(d.id)}/report.html`} target="_blank" rel="noopener">
              Report (server)
            </a>{' '}
            <button type="button" class="btn small primary" onClick={() => print()}>
              Print this review
            </button>
          </span>
        </div>
        <dl class="facts inline">
          <dt>Ran</dt>
          <dd>
            {dateTime(d.startedAt)} – {dateTime(d.endedAt)} ({minutes(d.endedAt ? (d.endedAt - d.startedAt) / 60000 : null)})
          </dd>
          <dt>Judged by</dt>
          <dd>{d.model ? `${d.model.name} v${d.model.version} (${d.model.sha256.slice(0, 12)}…)` : 'no model'}</dd>
          <dt>Endpoint</dt>
          <dd>
            <span data-testid="endpoint-record">
              <Badge tone={endpointRecordText(d).tone} title={d.endpointState ? ENDPOINT_WORDS[d.endpointState].help : undefined}>
                {endpointRecordText(d).text}
              </Badge>{' '}
              {d.endpointAt && `at ${minutes((d.endpointAt - d.startedAt) / 60000)} from the start`}
            </span>
            {d.endpointState === 'held' && <EndpointHolds holds={[...rs].reverse().find((r) => r.endpoint.state === 'held')?.endpoint.holds} />}
          </dd>
          <dt>Ended</dt>
          <dd data-testid="end-statement">
            {d.endReason ?? (d.status === 'open' ? 'still running' : '—')}
            {d.end?.disagreement && (
              <span class="field-error small">
                {' '}
                <span aria-hidden="true">▲ </span>
                {d.end.disagreement}
              </span>
            )}
          </dd>
          <dt>Duration</dt>
          <dd data-testid="golden-duration">{goldenDurationText(d, version.data?.referenceEndpoints ?? [])}</dd>
          <dt>Alarms</dt>
          <dd>{d.alarmCount}</dd>
          <dt>Spectra</dt>
          <dd>
            {d.spectrumCount}
            {d.suspectCount != null && (
              <span data-testid="scan-counts">
                {` (${scanCountsText(d)}; a suspect scan is a single spectrum beyond a limit that raised no alarm on its own)`}
              </span>
            )}
          </dd>
        </dl>
      </div>
      {results.error && <ErrorBox message={results.error} onRetry={results.reload} />}
      {results.loading && !results.data && <Loading what="results" />}
      {results.data && <Timeline events={timeline(d, rs, d.alarms, c)} durationMin={d.endedAt ? (d.endedAt - d.startedAt) / 60000 : (rs[rs.length - 1]?.elapsedMin ?? 0)} />}
      {d.alarms.some((a) => a.state !== 'normal') && (
        <div class="review-alarms" data-testid="review-alarms">
          <AlarmList alarms={d.alarms} now={Date.now()} title="This batch's alarms still to attend to" currentBatch={d.id} onChanged={detail.reload} />
        </div>
      )}
      {cmp.error && <ErrorBox message={`Comparison: ${cmp.error}`} />}
      {results.data && (
        <Overlay
          d={d}
          env={env.data}
          cmp={cmp.data ?? null}
          own={rs}
          others={others.data ?? []}
          alignedNote={
            cmp.loading
              ? 'loading the DTW alignment…'
              : c
                ? `aligned to the golden mean trajectory by DTW, distance ${sig(c.dtw.distance)}`
                : 'not aligned: no DTW comparison is available, so the batch is drawn on its own progress'
          }
        />
      )}
      {results.data && <StatsOverTime rs={rs} win={win} />}
      {results.data && (
        <PropertyOverTime
          rs={rs}
          version={version.data ?? null}
          endpointMin={d.endpointAt !== null ? (d.endpointAt - d.startedAt) / 60000 : null}
          lab={predicted ? labPoints(lab.data?.rows ?? [], predicted.name, d.startedAt) : []}
        />
      )}
      {lab.error && <ErrorBox message={`Lab values: ${lab.error}`} onRetry={lab.reload} />}
      {!lab.error && (lab.data !== null || !lab.loading) && <LabValues batch={d.id} startedAt={d.startedAt} rows={lab.data?.rows ?? null} toleranceMs={lab.data?.toleranceMs ?? null} property={predicted} me={me} onAdded={lab.reload} />}
      {results.data && win && <DepartureContributions batch={d.id} results={rs} win={win} regions={c?.regions ?? null} />}
      {results.data && !win && <Empty>The batch never left the golden batches by the alarm rule (a run of points outside the envelope or above a limit): there is no departure window.</Empty>}
      <Advisory />
    </div>
  );
}

/**
 * The batch's time to its endpoint (or its run time, without one) against the time the reference
 * batches took to their known endpoints (the version's referenceEndpoints).
 */
export function goldenDurationText(d: { startedAt: number; endedAt: number | null; endpointAt: number | null }, refs: { elapsedMin: number }[]): string {
  const ran = d.endedAt !== null ? (d.endedAt - d.startedAt) / 60000 : null;
  const at = d.endpointAt !== null ? (d.endpointAt - d.startedAt) / 60000 : null;
  const mins = refs.map((r) => r.elapsedMin).filter((x) => Number.isFinite(x));
  const own = at !== null ? `endpoint at ${minutes(at)}` : `no endpoint${ran !== null ? `; ran ${minutes(ran)}` : ''}`;
  if (!mins.length) return `${own}; the model knows no reference endpoints to compare with`;
  const lo = Math.min(...mins);
  const hi = Math.max(...mins);
  const x = at ?? ran;
  const verdict = x === null ? '' : x > hi ? (at !== null ? ' — later than every golden batch' : ' — longer than every golden batch took to its endpoint') : x < lo ? (at !== null ? ' — earlier than every golden batch' : '') : at !== null ? ' — within the golden range' : '';
  return `${own}; the ${mins.length} golden batches reached theirs at ${minutes(lo)}–${minutes(hi)}${verdict}`;
}

function Timeline({ events, durationMin }: { events: TimelineEvent[]; durationMin: number }) {
  const span = Math.max(durationMin, ...events.map((e) => e.tMin), 1);
  const glyph: Record<TimelineEvent['kind'], string> = { start: '●', 'first-exit': '▲', alarm: '■', 'alarm-cleared': '□', endpoint: '◆', end: '●' };
  return (
    <div class="panel" data-testid="timeline">
      <h3>Departure timeline</h3>
      <div class="timeline-bar" aria-hidden="true">
        {events.map((e, i) => (
          <span key={i} class={`tl-mark tl-${e.kind}`} style={{ left: `${(100 * e.tMin) / span}%` }} title={`${minutes(e.tMin)}: ${e.label}`}>
            {glyph[e.kind]}
          </span>
        ))}
      </div>
      <ol class="timeline-list">
        {events.map((e, i) => (
          <li key={i} class={`tl-${e.kind}`}>
            <span class="tl-glyph">{glyph[e.kind]}</span> <span class="num">{minutes(e.tMin)}</span> {e.label}
          </li>
        ))}
      </ol>
    </div>
  );
}

function Overlay({ d, env, cmp, own, others, alignedNote }: { d: BatchDetail; env: ModelEnvelopeView | null; cmp: ComparisonResponse | null; own: ResultRecord[]; others: { id: string; results: ResultRecord[] }[]; alignedNote: string }) {
  const pcs = (env?.scores.map((s) => s.pc) ?? [1, 2]).slice(0, 3);
  return (
    <div class="panel" data-testid="overlay">
      <h3>
        Scores on the golden envelope <span class="sub">({alignedNote})</span>
      </h3>
      <div class="two-col">
        {pcs.map((pc) => {
          const band = scoreBand(env, pc);
          const lines: { x: number[]; y: number[]; style: SeriesStyle; label: string }[] = [];
          const al = cmp ? alignedLine(cmp.comparison, pc) : null;
          if (al) lines.push({ ...al, style: COMPARE_STYLES[0], label: `${d.id} (DTW-aligned)` });
          else lines.push({ x: own.map((r) => r.progress), y: own.map((r) => r.scores[pc - 1]), style: COMPARE_STYLES[0], label: d.id });
          others.forEach((o, i) => lines.push({ x: o.results.map((r) => r.progress), y: o.results.map((r) => r.scores[pc - 1]), style: COMPARE_STYLES[(i + 1) % COMPARE_STYLES.length], label: o.id }));
          return <OverlayChart key={`${pc}-${lines.length}-${cmp ? 1 : 0}-${env?.versionId ?? ''}`} pc={pc} band={band} lines={lines} xLabel={progressLabel(env)} />;
        })}
      </div>
    </div>
  );
}

/** Join several (x, y) lines on one sorted x axis for uPlot (null where a line has no point). */
export function joinLines(lines: { x: number[]; y: number[] }[]): (number | null)[][] {
  const xs = [...new Set(lines.flatMap((l) => l.x))].sort((a, b) => a - b);
  const pos = new Map(xs.map((x, i) => [x, i]));
  const cols = lines.map((l) => {
    const c: (number | null)[] = new Array(xs.length).fill(null);
    l.x.forEach((x, i) => (c[pos.get(x)!] = l.y[i] ?? null));
    return c;
  });
  return [xs, ...cols];
}

function OverlayChart({ pc, band, lines, xLabel }: { pc: number; band: ReturnType<typeof scoreBand>; lines: { x: number[]; y: number[]; style: SeriesStyle; label: string }[]; xLabel: string }) {
  const data = useMemo(() => joinLines(lines), [lines]);
  return (
    <Chart
      title={`PC${pc} of the reviewed batch and compared batches on the golden envelope`}
      height={220}
      optsKey={`ov-${pc}-${lines.map((l) => l.label).join()}-${band ? band.x.length : 0}-${xLabel}`}
      data={data as unknown as uPlot.AlignedData}
      legend={[...lines.map((l) => ({ style: l.style, label: l.label })), { style: STYLE.goldenMean }, { style: STYLE.envelope }]}
      make={(w, h) => {
        const o = scoreChartOptions({ width: w, height: h, pc, xLabel, yLabel: `PC${pc} score`, getBand: () => band, getScores: () => lines.flatMap((l) => l.y) });
        o.series = [{ label: xLabel }, ...lines.map((l) => ({ label: l.label, stroke: l.style.stroke, width: l.style.width, dash: l.style.dash.length ? l.style.dash : undefined, points: { show: false }, spanGaps: true }))];
        return o;
      }}
    />
  );
}

function StatsOverTime({ rs, win }: { rs: ResultRecord[]; win: { fromSeq: number; toSeq: number } | null }) {
  const x = rs.map((r) => r.elapsedMin);
  const conf = rs[0]?.limits.confidence ?? NaN;
  const marks = () => {
    if (!win) return [];
    const a = rs.find((r) => r.seq === win.fromSeq);
    const b = rs.find((r) => r.seq === win.toSeq);
    return [
      ...(a ? [{ x: a.elapsedMin, label: 'departure', style: STYLE.selected }] : []),
      ...(b && b !== a ? [{ x: b.elapsedMin, label: 'end of departure window', style: { ...STYLE.selected, dash: [4, 3] } }] : []),
    ];
  };
  return (
    <div class="panel">
      <h3>T² and Q over the batch</h3>
      <div class="two-col">
        {(['T²', 'Q'] as const).map((stat) => {
          const y = rs.map((r) => (stat === 'T²' ? r.t2 : r.q));
          const lim = rs[rs.length - 1] ? (stat === 'T²' ? rs[rs.length - 1].limits.t2 : rs[rs.length - 1].limits.q) : NaN;
          // A departure far above the limit would flatten the limit line to the axis: use a log scale then.
          const log = Math.max(...y) > 20 * lim && y.every((v) => v > 0);
          return (
            <Chart
              key={stat}
              title={`${stat} over the batch`}
              height={200}
              optsKey={`rev-${stat}-${rs.length}-${log}-${win?.fromSeq}-${win?.toSeq}`}
              data={[x, y] as unknown as uPlot.AlignedData}
              legend={[{ style: STYLE.batch, label: stat }, { style: STYLE.limit, label: limitName(stat, conf) }, { style: { ...STYLE.outside, label: 'above limit ▲' } }]}
              make={(w, h) =>
                statChartOptions({
                  width: w,
                  height: h,
                  stat,
                  log,
                  hasLocal: false,
                  xLabel: 'elapsed time (min)',
                  yLabel: log ? `${stat} (log scale)` : stat,
                  getLines: () => [{ value: lim, label: limitName(stat, conf), style: STYLE.limit }],
                  limitAt: () => lim,
                  getValues: () => y,
                  getMarks: marks,
                })
              }
            />
          );
        })}
      </div>
    </div>
  );
}

function DepartureContributions({ batch, results, win, regions }: { batch: string; results: ResultRecord[]; win: { fromSeq: number; toSeq: number }; regions: RegionContribution[] | null }) {
  const seqs = sampleSeqs(results, win.fromSeq, win.toSeq, 6);
  const res = useAsync(() => Promise.all(seqs.map((s) => api.contributions(batch, s))), [batch, seqs.join(',')]);
  const mean = res.data ? meanContributions(res.data.map((r) => r.contributions)) : null;
  const a = results.find((r) => r.seq === win.fromSeq);
  const b = results.find((r) => r.seq === win.toSeq);
  return (
    <div class="panel" data-testid="departure-contributions">
      <h3>
        Contributions over the departure window{' '}
        <span class="sub">
          {minutes(a?.elapsedMin)} – {minutes(b?.elapsedMin)}, mean of {seqs.length} spectra
        </span>
      </h3>
      {res.loading && !res.data && <Loading what="contributions" />}
      {res.error && <ErrorBox message={res.error} onRetry={res.reload} />}
      {mean && (
        <div class="two-col">
          <Chart
            title="Mean Q contributions by wavelength over the departure window"
            height={220}
            optsKey={`dep-${batch}-${win.fromSeq}`}
            data={contributionSeries(mean, 'q') as unknown as uPlot.AlignedData}
            legend={[{ style: { ...STYLE.batch, fill: 'rgba(0,114,178,0.55)' }, label: 'mean Q contribution (e²)' }]}
            make={(w, h) => contributionOptions({ width: w, height: h, xLabel: 'wavelength (nm)', yLabel: 'Q contribution', label: 'Q contribution', getRegions: () => mean.regions })}
          />
          {regions && regions.length ? (
            <RegionShareTable caption="Regions driving the departure (band assignments; T² shares of the window's summed contributions)" rows={regions} />
          ) : (
            <RegionShareTable caption="Regions driving the departure (band assignments)" rows={topShares(mean, 'q', 6)} totalRegions={mean.regions.length} />
          )}
        </div>
      )}
    </div>
  );
}
