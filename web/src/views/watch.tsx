/** Watch: one live batch — scores on the golden envelope, score plane, T²/Q, endpoint, spectrum, contributions, alarms. */
import { useEffect, useMemo, useRef, useState } from 'preact/hooks';
import type uPlot from 'uplot';
import type { ModelEnvelopeView } from '../../../core/api/rest.ts';
import type { EndpointStatus } from '../../../core/monitor/types.ts';
import { useLive } from '../live/use-live.ts';
import type { LiveState } from '../live/live-state.ts';
import { envCol } from '../live/live-state.ts';
import { Chart, setDataIfShaped } from '../charts/chart.tsx';
import { planeOptions, scoreChartOptions, statChartOptions } from '../charts/chart-options.ts';
import { Advisory, Badge, Empty, ErrorBox, Loading } from '../components/status.tsx';
import { EndpointHolds } from './endpoint-holds.tsx';
import { AnalyzerStatusBadge } from '../components/analyzer-status.tsx';
import { ConnectionNote } from './floor.tsx';
import { AlarmList } from './alarm-list.tsx';
import { ContributionsPanel } from './contributions-panel.tsx';
import { SpectrumPanel } from './spectrum-panel.tsx';
import { etaText, progressView, propertyProgressText, stallAlarm } from './floor-data.ts';
import { useEnvelope } from './use-envelope.ts';
import { alarmedPcsOf, alarmLimitScope, availablePcs, goldenPath, hasAlarmLimit, hasLocal, progressLabel, referencePaths, scoreBand, scoreData, statData, statLines } from './watch-data.ts';
import { ENDPOINT_WORDS } from '../format/status-words.ts';
import { limitName, processTime, minutes, percent, sig, withUnit } from '../format/number-format.ts';
import { STYLE } from '../theme/palette.ts';
import { href } from '../router.ts';
import { criterionName, plainText } from '../../../core/vocabulary/plain-names.ts';

export function Watch({ unit, now }: { unit: string; now: number }) {
  const live = useLive({ kind: 'unit', unit }, 20_000);
  const s = live.state;
  const modelId = s.model?.versionId ?? s.batch?.model?.versionId ?? null;
  const { env, withReferences: planeEnv } = useEnvelope(modelId);
  const [pcs, setPcs] = useState<number[]>([1, 2]);
  const [plane, setPlane] = useState<[number, number]>([1, 2]);
  const [log, setLog] = useState(false);
  // The picked spectrum belongs to a batch: when the unit moves on to a new batch, nothing is picked
  // (the spectrum view follows the new batch's latest and the contributions close).
  const [pickedIn, setPickedIn] = useState<{ batch: string; seq: number } | null>(null);
  const unitStatus = s.units.get(unit);
  const snapshotSeen = s.lastN > 0;

  if (!snapshotSeen) {
    return (
      <section class="view watch">
        <WatchHead unit={unit} s={s} connection={live.connection} />
        {live.connection === 'closed' ? <Empty>No live connection to the server yet; retrying.</Empty> : <Loading what={`unit ${unit}`} />}
      </section>
    );
  }
  if (s.error && !unitStatus) {
    return (
      <section class="view watch">
        <WatchHead unit={unit} s={s} connection={live.connection} />
        <ErrorBox message={s.error} />
      </section>
    );
  }
  if (!s.batch) {
    return (
      <section class="view watch">
        <WatchHead unit={unit} s={s} connection={live.connection} />
        <Empty>
          No batch is running on this unit. Finished batches are in <a href={href({ view: 'review', batch: null, compare: [] })}>Review</a>.
        </Empty>
        <AlarmList alarms={[...s.alarms.values()]} now={now} />
      </section>
    );
  }
  const envData = env.data;
  const pcChoices = availablePcs(envData, s.latest?.scores ?? null);
  const batchId = s.batch.id;
  const pickedSeq = pickedIn && pickedIn.batch === batchId ? pickedIn.seq : null;
  const setPicked = (seq: number | null) => setPickedIn(seq === null ? null : { batch: batchId, seq });
  // a PC with an envelope alarm standing in this batch is drawn whatever is ticked
  const alarmedPcs = alarmedPcsOf([...s.alarms.values()], batchId).filter((pc) => pcChoices.includes(pc));
  const shownPcs = [...new Set([...pcs, ...alarmedPcs])].filter((pc) => pcChoices.includes(pc)).sort((a, b) => a - b);
  return (
    <section class="view watch">
      <WatchHead unit={unit} s={s} connection={live.connection} />
      {env.error && <ErrorBox message={`Golden envelope not available: ${env.error}`} onRetry={env.reload} />}
      {!modelId && <Empty>No model judged this batch, so there is no envelope or limits to compare with.</Empty>}
      <div class="watch-grid">
        <div class="watch-main">
          <div class="panel">
            <div class="panel-head">
              <h2>Scores on the golden envelope</h2>
              <fieldset class="pc-pick">
                <legend class="sr-only">principal components shown</legend>
                {pcChoices.map((pc) => {
                  const alarmed = alarmedPcs.includes(pc);
                  return (
                    <label key={pc} title={alarmed ? `PC${pc} has an alarm standing in this batch: it is drawn until the alarm is cleared` : undefined} data-testid={`pc-pick-${pc}`}>
                      <input
                        type="checkbox"
                        checked={alarmed || pcs.includes(pc)}
                        disabled={alarmed}
                        onChange={(e) => setPcs((old) => ((e.target as HTMLInputElement).checked ? [...old, pc].sort((a, b) => a - b) : old.filter((x) => x !== pc)))}
                      />{' '}
                      PC{pc}
                      {alarmed && <span class="alarm-mark"> ▲ alarm</span>}
                    </label>
                  );
                })}
              </fieldset>
            </div>
            {shownPcs.map((pc) => (
                <ScoreChart key={`${pc}-${envData?.versionId}`} live={live} pc={pc} env={envData} picked={pickedSeq} onPick={setPicked} />
              ))}
          </div>
          <div class="panel">
            <div class="panel-head">
              <h2>Hotelling T² and Q (SPE)</h2>
              <label>
                <input type="checkbox" checked={log} onChange={(e) => setLog((e.target as HTMLInputElement).checked)} /> log scale
              </label>
            </div>
            <div class="two-col">
              <StatChart live={live} stat="T²" log={log} picked={pickedSeq} onPick={setPicked} env={envData} />
              <StatChart live={live} stat="Q" log={log} picked={pickedSeq} onPick={setPicked} env={envData} />
            </div>
            <p class="hint" data-testid="limit-scope-note">
              A global limit is one value for the whole batch, from all the reference spectra; a local limit is the limit at this point of the golden course,
              which changes along the batch. Click a point on any chart to see its contributions by wavelength.
            </p>
          </div>
          <div class="two-col">
            <div class="panel">
              <div class="panel-head">
                <h2>Score plane</h2>
                <PlanePick pcs={pcChoices} value={plane} onChange={setPlane} />
              </div>
              <PlaneChart live={live} env={planeEnv} a={plane[0]} b={plane[1]} />
            </div>
            <SpectrumPanel key={batchId} batch={batchId} seq={pickedSeq ?? s.latest?.seq ?? null} following={pickedSeq === null} latestT={s.latest?.t ?? null} />
          </div>
          {pickedSeq !== null && <ContributionsPanel key={batchId} batch={batchId} seq={pickedSeq} onClose={() => setPicked(null)} />}
        </div>
        <aside class="watch-side">
          <EndpointPanel ep={s.endpoint} s={s} />
          <AlarmList alarms={[...s.alarms.values()]} now={now} currentBatch={s.batch.id} />
        </aside>
      </div>
    </section>
  );
}

function WatchHead({ unit, s, connection }: { unit: string; s: LiveState; connection: 'connecting' | 'open' | 'closed' }) {
  const u = s.units.get(unit);
  const b = s.batch;
  const r = s.latest;
  return (
    <header class="view-head">
      <h1>
        Watch · {u?.name ?? unit}
        {b && <span class="sub"> batch {b.id}</span>}
      </h1>
      <div class="head-facts">
        {b && <span>product {b.product}</span>}
        {b && <span>started {processTime(b.startedAt)}</span>}
        {r && <span>{minutes(r.elapsedMin)} elapsed</span>}
        {r && <span data-testid="watch-progress">{progressView(r, s.endpoint ?? r.endpoint, stallAlarm(s.alarms.values(), b?.unit ?? unit, b?.id ?? null)).text.replace(/ · .* elapsed$/, '')}</span>}
        {s.model && (
          <span>
            model {s.model.name} v{s.model.version}
          </span>
        )}
        {r && <span data-testid="point-count">{s.series.length} spectra</span>}
        <AnalyzerStatusBadge status={u?.analyzerStatus} suppressed={u?.suppression} />
        <ConnectionNote state={connection} />
        {u && (u.status === 'stale' || u.status === 'offline') && <Badge tone="warn">{u.status === 'stale' ? 'data stale' : 'analyzer offline'}</Badge>}
      </div>
    </header>
  );
}

/** Subscribe a chart to series updates; returns a ref that receives the uPlot instance. */
function useSeriesFeed(live: ReturnType<typeof useLive>, data: () => uPlot.AlignedData) {
  const inst = useRef<uPlot | null>(null);
  const dataRef = useRef(data);
  dataRef.current = data;
  useEffect(() => {
    const f = () => setDataIfShaped(inst.current, dataRef.current());
    live.onSeries.add(f);
    return () => {
      live.onSeries.delete(f);
    };
  }, [live.onSeries]);
  return inst;
}

export function ScoreChart({ live, pc, env, picked, onPick }: { live: ReturnType<typeof useLive>; pc: number; env: ModelEnvelopeView | null; picked: number | null; onPick: (seq: number) => void }) {
  const s = live.state;
  const band = useMemo(() => scoreBand(env, pc), [env, pc]);
  const pickedRef = useRef(picked);
  pickedRef.current = picked;
  const inst = useSeriesFeed(live, () => scoreData(s, pc));
  const data = scoreData(s, pc);
  useEffect(() => inst.current?.redraw(), [picked]);
  return (
    <Chart
      testId={`score-chart-pc${pc}`}
      title={`PC${pc} score against ${progressLabel(env)}, with the golden envelope`}
      height={200}
      optsKey={`score-${pc}-${env?.versionId ?? 'none'}`}
      data={data}
      legend={[{ style: STYLE.batch, label: `PC${pc} score` }, { style: STYLE.goldenMean }, { style: STYLE.envelope, label: band ? 'golden envelope' : 'golden envelope (not available)' }, { style: { ...STYLE.outside, label: 'outside envelope ▲▼' } }]}
      make={(w, h) =>
        scoreChartOptions({
          width: w,
          height: h,
          pc,
          xLabel: progressLabel(env),
          yLabel: `PC${pc} score`,
          getBand: () => band,
          getScores: () => s.series.view(`s${pc}` as 's1'),
          getStatus: () => s.series.view(envCol(pc)),
          getMarks: () => pickedMark(s, pickedRef.current, 'progress'),
        })
      }
      onReady={(u) => (inst.current = u)}
      onPick={(i) => onPick(s.series.at('seq', i))}
    />
  );
}

function pickedMark(s: LiveState, seq: number | null, col: 'progress' | 'elapsedMin') {
  if (seq === null) return [];
  const i = s.series.lastIndexAtMost('seq', seq);
  if (i < 0) return [];
  return [{ x: s.series.at(col, i), label: `selected #${seq}`, style: STYLE.selected }];
}

export function StatChart({ live, stat, log, picked, onPick, env }: { live: ReturnType<typeof useLive>; stat: 'T²' | 'Q'; log: boolean; picked: number | null; onPick: (seq: number) => void; env?: ModelEnvelopeView | null }) {
  const course: [number, number] | null = env && env.progressKind === 'time' && env.progress.length ? [0, env.progress[env.progress.length - 1]] : null;
  const s = live.state;
  const local = hasLocal(s, stat);
  const alarm = hasAlarmLimit(s, stat);
  const inst = useSeriesFeed(live, () => statData(s, stat, local, alarm));
  const pickedRef = useRef(picked);
  pickedRef.current = picked;
  useEffect(() => inst.current?.redraw(), [picked]);
  const conf = s.latest?.limits.confidence ?? NaN;
  const alarmConf = s.latest?.alarmLimits?.confidence ?? NaN;
  const limitCol = stat === 'T²' ? 't2Limit' : 'qLimit';
  const localCol = stat === 'T²' ? 'localT2' : 'localQ';
  return (
    <Chart
      testId={`stat-chart-${stat === 'T²' ? 't2' : 'q'}`}
      title={`${stat} against elapsed time with its ${limitName(stat, conf)}`}
      height={220}
      optsKey={`stat-${stat}-${log}-${local}-${alarm}-${course?.[1] ?? ''}`}
      data={statData(s, stat, local, alarm)}
      legend={[
        { style: STYLE.batch, label: stat },
        { style: STYLE.limit, label: limitName(stat, conf, local ? 'global limit' : 'limit') },
        ...(local ? [{ style: STYLE.warnLimit, label: limitName(stat, conf, 'local limit') }] : []),
        ...(alarm ? [{ style: STYLE.alarmLimit, label: limitName(stat, alarmConf, local || alarmLimitScope(s, stat) === 'local' ? `${alarmLimitScope(s, stat)} alarm limit` : 'alarm limit') }] : []),
        { style: { ...STYLE.outside, label: 'above limit ▲' } },
      ]}
      make={(w, h) =>
        statChartOptions({
          width: w,
          height: h,
          stat,
          log,
          hasLocal: local,
          hasAlarm: alarm,
          xLabel: 'elapsed time (min)',
          yLabel: `${stat}${log ? ' (log scale)' : ''}`,
          getLines: () => statLines(s, stat),
          limitAt: (i) => {
            const l = s.series.at(localCol, i);
            return Number.isFinite(l) ? l : s.series.at(limitCol, i);
          },
          getValues: () => s.series.view(stat === 'T²' ? 't2' : 'q'),
          getCourse: () => course,
          getMarks: () => pickedMark(s, pickedRef.current, 'elapsedMin'),
        })
      }
      onReady={(u) => (inst.current = u)}
      onPick={(i) => onPick(s.series.at('seq', i))}
    />
  );
}

function PlanePick({ pcs, value, onChange }: { pcs: number[]; value: [number, number]; onChange: (v: [number, number]) => void }) {
  const sel = (k: 0 | 1) => (
    <select
      aria-label={k === 0 ? 'horizontal axis PC' : 'vertical axis PC'}
      value={value[k]}
      onChange={(e) => {
        const v = Number((e.target as HTMLSelectElement).value);
        onChange(k === 0 ? [v, value[1]] : [value[0], v]);
      }}
    >
      {pcs.map((pc) => (
        <option key={pc} value={pc}>
          PC{pc}
        </option>
      ))}
    </select>
  );
  return (
    <span class="plane-pick">
      {sel(0)} against {sel(1)}
    </span>
  );
}

export function PlaneChart({ live, env, a, b }: { live: ReturnType<typeof useLive>; env: ModelEnvelopeView | null; a: number; b: number }) {
  const s = live.state;
  const refs = useMemo(() => referencePaths(env, a, b), [env, a, b]);
  const golden = useMemo(() => goldenPath(env, a, b), [env, a, b]);
  const data = (): uPlot.AlignedData =>
    [null, ...refs, golden ?? [[], []], [s.series.view(`s${a}` as 's1'), s.series.view(`s${b}` as 's1')]] as unknown as uPlot.AlignedData;
  const inst = useSeriesFeed(live, data);
  return (
    <Chart
      testId="plane-chart"
      title={`Score plane PC${a} against PC${b} with the golden path`}
      height={300}
      optsKey={`plane-${a}-${b}-${refs.length}-${env?.versionId}`}
      data={data()}
      legend={[
        { style: STYLE.batch },
        { style: STYLE.goldenMean, label: 'golden path' },
        ...(refs.length ? [{ style: STYLE.reference, label: 'reference batches' }] : []),
        { style: { ...STYLE.batch, marker: 'circle', label: 'start ●' } },
        { style: { ...STYLE.selected, label: 'latest ◆' } },
      ]}
      make={(w, h) => planeOptions({ width: w, height: h, pcA: a, pcB: b, nRefs: refs.length })}
      onReady={(u) => (inst.current = u)}
    />
  );
}

export function EndpointPanel({ ep, s }: { ep: EndpointStatus | null; s: LiveState }) {
  if (!ep) {
    return (
      <div class="panel endpoint" data-testid="endpoint-panel">
        <h2>Endpoint</h2>
        <Empty>No endpoint rule: no model judges this batch.</Empty>
        <Advisory />
      </div>
    );
  }
  const w = ENDPOINT_WORDS[ep.state];
  const pred = s.latest?.prediction;
  return (
    <div class="panel endpoint" data-testid="endpoint-panel">
      <div class="panel-head">
        <h2>Endpoint</h2>
        <Badge tone={w.tone} title={w.help}>
          {w.text}
        </Badge>
      </div>
      <ol class="states" aria-label="endpoint states">
        {(['running', 'nearing', 'settling', 'held', 'done', 'signalled'] as const).map((st) => (
          <li key={st} class={st === ep.state ? 'current' : ''} aria-current={st === ep.state ? 'step' : undefined}>
            {st}
          </li>
        ))}
      </ol>
      {ep.state === 'held' && <EndpointHolds holds={ep.holds} />}
      <dl class="facts">
        <dt>Progress</dt>
        <dd data-testid="progress">{progressView(s.latest, ep, stallAlarm(s.alarms.values(), s.batch?.unit ?? '', s.batch?.id ?? null)).text}</dd>
        <dt>Time to endpoint</dt>
        <dd data-testid="eta">{etaText(ep, stallAlarm(s.alarms.values(), s.batch?.unit ?? '', s.batch?.id ?? null), '') ?? '—'}</dd>
        <dt>Confirmation</dt>
        <dd data-testid="confirm">
          {ep.confirmCount} of {ep.confirmNeeded} consecutive spectra
        </dd>
        {ep.doneAt && (
          <>
            <dt>Reached</dt>
            <dd>
              {processTime(ep.doneAt.t)} (spectrum #{ep.doneAt.seq}) — {ep.doneAt.reason}
            </dd>
          </>
        )}
        {s.latest?.pace && (
          <>
            <dt>Pace</dt>
            <dd data-testid="pace">
              {minutes(s.latest.pace.tookMin)} to this point of progress; golden batches {minutes(s.latest.pace.expectedMin)} (alarm beyond {minutes(s.latest.pace.upperMin)})
              {s.latest.pace.z > 0 && s.latest.pace.tookMin > s.latest.pace.upperMin && <Badge tone="warn">behind the golden batches</Badge>}
            </dd>
          </>
        )}
        {pred && (
          <>
            <dt>Predicted {pred.name}</dt>
            <dd>
              {propertyProgressText(pred, ep)}
              {pred.extrapolating && <Badge tone="warn">extrapolating — outside calibration</Badge>}
            </dd>
          </>
        )}
      </dl>
      <table class="criteria">
        <caption>Criteria ({ep.combine === 'all' ? 'all must hold' : 'any one suffices'})</caption>
        <thead>
          <tr>
            <th scope="col">met</th>
            <th scope="col">criterion</th>
            <th scope="col">now</th>
          </tr>
        </thead>
        <tbody>
          {ep.criteria.map((c) => (
            <tr key={c.criterion}>
              <td>{c.met ? <Badge tone="ok">yes</Badge> : <Badge tone="muted">not yet</Badge>}</td>
              <td>{criterionName(c.criterion)}</td>
              <td>{c.text ? plainText(c.text) : `${sig(c.value)} vs ${sig(c.threshold)}`}</td>
            </tr>
          ))}
        </tbody>
      </table>
      <Advisory />
    </div>
  );
}
