/**
 * Frame-rate page for bench/sections/watch-fps.ts: the Watch view's own chart components (scores
 * on the envelope, T², Q, score plane) fed through the live reducer with 10,000 points per series,
 * new results arriving every frame. Reports frames per second on window.__tidelineFps.
 */
import { render } from 'preact';
import 'uplot/dist/uPlot.min.css';
import './styles.css';
import type { ModelEnvelopeView } from '../../core/api/rest.ts';
import type { MonitorResult } from '../../core/monitor/types.ts';
import { applyLive, createLiveState } from './live/live-state.ts';
import type { LiveHandle } from './live/use-live.ts';
import { PlaneChart, ScoreChart, StatChart } from './views/watch.tsx';

const params = new URLSearchParams(location.search);
const POINTS = Number(params.get('points') ?? 10_000);
const PER_FRAME = Number(params.get('perFrame') ?? 5);
const SECONDS = Number(params.get('seconds') ?? 5);
const CHARTS = (params.get('charts') ?? 'score,stat,plane').split(',');

// Deterministic generator (mulberry32), so every run draws the same data.
let seed = 12345;
function rand(): number {
  seed |= 0;
  seed = (seed + 0x6d2b79f5) | 0;
  let t = Math.imul(seed ^ (seed >>> 15), 1 | seed);
  t = (t + Math.imul(t ^ (t >>> 7), 61 | t)) ^ t;
  return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
}

const DURATION_MIN = 90;
function result(seq: number): MonitorResult {
  const m = (seq / POINTS) * DURATION_MIN;
  const s1 = 8 * Math.exp(-m / 25) - 4 + (rand() - 0.5) * 0.6;
  const s2 = 2 * Math.sin(m / 15) + (rand() - 0.5) * 0.4;
  const t2 = 2 + rand() * 6 + (seq % 997 === 0 ? 20 : 0);
  const q = 0.5 + rand() * 1.5;
  return {
    seq,
    t: 1_700_000_000_000 + m * 60000,
    elapsedMin: m,
    progress: m,
    progressFraction: m / DURATION_MIN,
    scores: [s1, s2, (rand() - 0.5) * 0.5],
    t2,
    q,
    combined: t2 / 12 + q / 3,
    limits: { t2: 12.5, q: 2.8, combined: 3, confidence: 0.99 },
    localLimits: null,
    envelope: [],
    prediction: null,
    suspect: false,
    conditionChanges: [],
    activeConditions: [],
    endpoint: { state: 'running', criteria: [], combine: 'all', confirmCount: 0, confirmNeeded: 3, etaMin: null, doneAt: null },
    events: [],
  };
}

const progress = Array.from({ length: 101 }, (_, i) => (i / 100) * DURATION_MIN * 1.1);
const env: ModelEnvelopeView = {
  versionId: 'bench',
  progressKind: 'time',
  progressUnit: 'min',
  progress,
  scores: [
    { pc: 1, expected: progress.map((m) => 8 * Math.exp(-m / 25) - 4), lower: progress.map((m) => 8 * Math.exp(-m / 25) - 5), upper: progress.map((m) => 8 * Math.exp(-m / 25) - 3) },
    { pc: 2, expected: progress.map((m) => 2 * Math.sin(m / 15)), lower: progress.map((m) => 2 * Math.sin(m / 15) - 0.8), upper: progress.map((m) => 2 * Math.sin(m / 15) + 0.8) },
  ],
  local: null,
  limits: { t2: 12.5, q: 2.8, combined: 3, confidence: 0.99 },
  references: [],
};

const state = createLiveState(POINTS);
state.subscription = 'bench';
let n = 1;
applyLive(state, {
  type: 'snapshot',
  subscription: 'bench',
  n: n++,
  serverTime: 0,
  scope: { kind: 'batch', batch: 'bench' },
  units: [],
  alarms: [],
  batch: {
    id: 'bench', unit: 'bench', product: 'bench', analyzer: 'bench', status: 'open', startedAt: 1_700_000_000_000, endedAt: null, endReason: null,
    spectrumCount: POINTS, firstSeq: 0, lastSeq: POINTS - 1, lastT: null, model: null, endpointState: 'running', endpointAt: null, alarmCount: 0, activeAlarms: 0,
  },
  results: Array.from({ length: POINTS }, (_, i) => result(i)),
  truncatedBefore: null,
  model: null,
});
const handle: LiveHandle = { state, connection: 'open', version: 0, onSeries: new Set() };
(window as unknown as { __benchHandle: LiveHandle }).__benchHandle = handle;

function Bench() {
  return (
    <main style={{ width: '1280px' }}>
      {CHARTS.includes('score') && <ScoreChart live={handle} pc={1} env={env} picked={null} onPick={() => {}} />}
      {CHARTS.includes('score') && <ScoreChart live={handle} pc={2} env={env} picked={null} onPick={() => {}} />}
      {CHARTS.includes('stat') && (
        <div class="two-col">
          <StatChart live={handle} stat="T²" log={false} picked={null} onPick={() => {}} env={env} />
          <StatChart live={handle} stat="Q" log={false} picked={null} onPick={() => {}} env={env} />
        </div>
      )}
      {CHARTS.includes('plane') && <PlaneChart live={handle} env={env} a={1} b={2} />}
    </main>
  );
}
render(<Bench />, document.getElementById('app')!);

declare global {
  interface Window {
    __tidelineFps?: { fps: number; frames: number; seconds: number; points: number; perFrame: number; rowsAtEnd: number };
  }
}

// Each frame: PER_FRAME new results through the reducer (window kept at POINTS), then every chart redraws.
let seq = POINTS;
let frames = 0;
let t0 = 0;
function frame(ts: number) {
  if (!t0) t0 = ts;
  for (let k = 0; k < PER_FRAME; k++) applyLive(state, { type: 'result', subscription: 'bench', n: n++, serverTime: 0, unit: 'bench', batch: 'bench', result: result(seq++) });
  handle.onSeries.forEach((f) => f());
  frames++;
  if (ts - t0 < SECONDS * 1000) requestAnimationFrame(frame);
  else window.__tidelineFps = { fps: (frames - 1) / ((ts - t0) / 1000), frames, seconds: (ts - t0) / 1000, points: POINTS, perFrame: PER_FRAME, rowsAtEnd: state.series.length };
}
setTimeout(() => requestAnimationFrame(frame), 300);
