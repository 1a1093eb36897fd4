/** The latest (or selected) spectrum, raw and preprocessed, against the golden mean and band. */
import { useEffect, useRef, useState } from 'preact/hooks';
import type uPlot from 'uplot';
import { api } from '../api/endpoints.ts';
import { get } from '../api/http.ts';
import { ApiError, errorText } from '../api/problem.ts';
import type { SpectrumView } from '../../../core/api/rest.ts';
import { Chart } from '../charts/chart.tsx';
import { spectrumOptions } from '../charts/chart-options.ts';
import type { Band } from '../charts/envelope-band.ts';
import { ErrorBox, Loading } from '../components/status.tsx';
import { processTime, sig } from '../format/number-format.ts';
import { STYLE } from '../theme/palette.ts';
import type { SeriesStyle } from '../theme/palette.ts';
import { sortedByAxis } from './spectrum-data.ts';

/** How often the panel refetches while following the latest spectrum (ms). */
const FOLLOW_EVERY_MS = 3000;

type Loaded = { kind: 'view'; v: SpectrumView } | { kind: 'raw'; seq: number; t: number; axis: number[]; values: number[]; note: string };

export function SpectrumPanel({ batch, seq, following }: { batch: string; seq: number | null; following: boolean; latestT?: number | null }) {
  const [loaded, setLoaded] = useState<Loaded | null>(null);
  const [error, setError] = useState<string | null>(null);
  const [wanted, setWanted] = useState<number | null>(seq);
  // Follow the latest spectrum at most once every few seconds, whatever the rate spectra arrive at:
  // a fetch waits for the rest of the interval and then takes the newest spectrum (a debounce that
  // restarted at each new spectrum never fired while spectra came faster than the interval). A
  // selected point is fetched at once.
  const latest = useRef(seq);
  latest.current = seq;
  const pending = useRef<ReturnType<typeof setTimeout> | null>(null);
  const lastAt = useRef(0);
  useEffect(() => {
    if (!following) {
      if (pending.current !== null) clearTimeout(pending.current);
      pending.current = null;
      setWanted(seq);
      return;
    }
    if (pending.current !== null || seq === null) return;
    const wait = Math.max(0, lastAt.current + FOLLOW_EVERY_MS - Date.now());
    pending.current = setTimeout(() => {
      pending.current = null;
      lastAt.current = Date.now();
      setWanted(latest.current);
    }, wait);
  }, [seq, following]);
  useEffect(
    () => () => {
      if (pending.current !== null) clearTimeout(pending.current);
    },
    [],
  );
  useEffect(() => {
    if (wanted === null) return;
    let live = true;
    loadSpectrum(batch, wanted).then(
      (l) => live && (setLoaded(l), setError(null)),
      (e) => live && setError(errorText(e)),
    );
    return () => {
      live = false;
    };
  }, [batch, wanted]);

  return (
    <div class="panel spectrum" data-testid="spectrum-panel">
      <div class="panel-head">
        <h2>
          Spectrum {loaded ? `#${loaded.kind === 'view' ? loaded.v.seq : loaded.seq}` : ''}
          {loaded && <span class="sub"> {processTime(loaded.kind === 'view' ? loaded.v.t : loaded.t)}</span>}
        </h2>
        <span class="muted small">{following ? 'following the latest (refreshed every 3 s)' : 'selected point'}</span>
      </div>
      {error && <ErrorBox message={error} />}
      {!loaded && !error && <Loading what="spectrum" />}
      {loaded?.kind === 'raw' && (
        <>
          <SpectrumChart title="raw absorbance" axis={loaded.axis} values={loaded.values} yLabel="absorbance" style={STYLE.batch} band={null} meanLabel="" />
          <p class="muted small">{loaded.note}</p>
        </>
      )}
      {loaded?.kind === 'view' && (
        <>
          <SpectrumChart title="raw absorbance" axis={loaded.v.raw.axis} values={loaded.v.raw.values} yLabel="absorbance" style={STYLE.batch} band={bandOf(loaded.v.raw)} meanLabel="reference mean (raw)" />
          {loaded.v.preprocessed && (
            <SpectrumChart
              title="preprocessed (model input)"
              axis={loaded.v.preprocessed.axis}
              values={loaded.v.preprocessed.values}
              yLabel="preprocessed"
              style={STYLE.preprocessed}
              band={bandOf(loaded.v.preprocessed)}
              meanLabel="reference mean (preprocessed)"
            />
          )}
          <p class="muted small" data-testid="golden-band-note">
            {goldenNote(loaded.v.golden)}
          </p>
        </>
      )}
    </div>
  );
}

/** What the golden band is, or why there is none, in words. */
export function goldenNote(g: SpectrumView['golden']): string {
  if (!g) return 'This server sends no golden band for spectra.';
  if ('note' in g) return `No golden band: ${g.note}.`;
  return `Golden band: ${g.batches} reference batches, ${g.spectra} of their spectra at progress ${sig(g.progressFrom)} to ${sig(g.progressTo)} (this spectrum ${sig(g.progress)}); each batch's mean spectrum, then mean ± ${sig(g.k)} sd between batches per wavelength.`;
}

function bandOf(p: SpectrumView['raw']): Band | null {
  if (!p.goldenMean || !p.goldenLower || !p.goldenUpper) return null;
  const s = sortedByAxis(p.axis, [p.goldenMean, p.goldenLower, p.goldenUpper]);
  return { x: s.axis, mean: s.series[0], lower: s.series[1], upper: s.series[2] };
}

async function loadSpectrum(batch: string, seq: number): Promise<Loaded> {
  try {
    const v = await get<SpectrumView>(`/api/batches/${encodeURIComponent(batch)}/spectrum-view?seq=${seq}`);
    return { kind: 'view', v };
  } catch (e) {
    // 404: this server has no spectrum-view route (or no such batch, which the next call reports).
    if (!(e instanceof ApiError && e.status === 404)) throw e;
  }
  const r = await api.spectra(batch, { fromSeq: seq, toSeq: seq, limit: 1 });
  const sp = r.items[0];
  if (!sp) throw new Error(`Spectrum #${seq} of batch ${batch} is not stored.`);
  return { kind: 'raw', seq: sp.seq, t: sp.t, axis: r.axis, values: sp.values, note: 'This server does not provide the preprocessed spectrum or the golden band for spectra; the raw spectrum is shown alone.' };
}

function SpectrumChart({ title, axis, values, yLabel, style, band, meanLabel }: { title: string; axis: number[]; values: number[]; yLabel: string; style: SeriesStyle; band: Band | null; meanLabel: string }) {
  const s = sortedByAxis(axis, [values]);
  // The band changes with each spectrum's progress; the chart reads it through a ref when it draws.
  const bandRef = useRef(band);
  bandRef.current = band;
  return (
    <Chart
      title={title}
      height={170}
      optsKey={`${title}-${band ? 1 : 0}`}
      data={[s.axis, s.series[0]] as unknown as uPlot.AlignedData}
      legend={[{ style, label: `this spectrum (${title})` }, ...(band ? [{ style: STYLE.goldenMean, label: meanLabel }, { style: STYLE.envelope, label: 'golden band' }] : [])]}
      make={(w, h) => spectrumOptions({ width: w, height: h, xLabel: 'wavelength (nm)', yLabel, series: [{ style, label: title }], getBand: band ? () => bandRef.current : undefined })}
    />
  );
}
