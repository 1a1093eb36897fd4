/** Pure helpers of the Model bench's shadow-run and health panels (docs/model-life.md). */
import type { HealthTest, ModelHealth, ShadowSide } from '../../../../core/api/model-life.ts';
import type { StatusTone } from '../../theme/palette.ts';

/** A health test's word and tone: the word carries the meaning, the tone helps. */
export function testStatus(t: HealthTest): { word: string; tone: StatusTone } {
  if (t.failed) return { word: 'fails', tone: 'alarm' };
  if (t.untested) return { word: 'not tested', tone: 'muted' };
  return { word: 'passes', tone: 'ok' };
}

const TEST_NAMES: Record<string, string> = {
  'alarm-rate': 'Alarms per batch',
  't2-rate': 'T² beyond its limit',
  'q-rate': 'Q beyond its limit',
  drift: 'Drift of batch-mean scores',
  bias: 'Property bias against lab',
  review: 'Periodic review',
};
export const testName = (code: string) => TEST_NAMES[code] ?? code;

/** One line for the Floor tile: the version's health in a few words; null when there is nothing to say. */
/** "Drift of …" → "drift of …" inside a sentence; a name that starts with a symbol or an abbreviation (T², Q, EWMA) keeps its case. */
function lowerFirst(s: string): string {
  return /^[A-Z][a-z]/.test(s) ? s.charAt(0).toLowerCase() + s.slice(1) : s;
}

export function healthLine(h: ModelHealth | null): { text: string; tone: StatusTone } | null {
  if (!h) return null;
  const failed = h.tests.filter((t) => t.failed);
  if (failed.length) return { text: `model health: ${failed.map((t) => lowerFirst(testName(t.code))).join(', ')} — fails`, tone: 'warn' };
  const tested = h.tests.filter((t) => !t.untested).length;
  const over = `${h.batches.length} batch${h.batches.length === 1 ? '' : 'es'}`;
  // Nothing tested is not a pass: say so in words and without the "fine" tone.
  if (tested === 0) return { text: `model health: not tested yet (${h.batches.length ? `${over}, too few to test` : 'no finished batch since deployment'})`, tone: 'muted' };
  const waiting = h.tests.length - tested;
  return { text: `model health: ${tested} test${tested === 1 ? '' : 's'} pass${tested === 1 ? 'es' : ''} over ${over}${waiting ? `, ${waiting} not tested yet` : ''}`, tone: 'ok' };
}

/** Endpoint difference in words, e.g. 'candidate 3.0 min later'. */
export function endpointDifference(min: number | null): string {
  if (min === null) return '—';
  if (Math.abs(min) < 0.05) return 'same time';
  return `candidate ${Math.abs(min).toFixed(1)} min ${min > 0 ? 'later' : 'earlier'}`;
}

export function labText(l: ShadowSide['lab']): string {
  return l ? `RMSE ${l.rmse.toPrecision(3)}, bias ${l.bias.toPrecision(2)} (n = ${l.n})` : '—';
}

/** Geometry of one EWMA chart: points and limit band in a w × h box (y symmetric about 0). */
export function ewmaGeometry(ewma: number[], limit: number[], w: number, h: number): { points: string; upper: string; lower: string; yMax: number; x: (i: number) => number; y: (v: number) => number } {
  const yMax = Math.max(1, ...ewma.map(Math.abs), ...limit) * 1.1;
  const n = Math.max(ewma.length, 2);
  const x = (i: number) => (i / (n - 1)) * w;
  const y = (v: number) => h / 2 - (v / yMax) * (h / 2);
  const line = (vs: number[]) => vs.map((v, i) => `${x(i).toFixed(1)},${y(v).toFixed(1)}`).join(' ');
  return { points: line(ewma), upper: line(limit), lower: line(limit.map((v) => -v)), yMax, x, y };
}
