/**
 * Scoring speed, one spectrum at a time on one core:
 * - score_per_s: raw 1,024-point spectra per second through the fitted chain (Savitzky–Golay
 *   2nd derivative, 15 points, quadratic; SNV) + projection on 8 PCs + T² + Q. Goal ≥ 20,000.
 * - score_vs_bare: that per-spectrum cost / a bare typed-array loop doing the same arithmetic
 *   (same coefficients, one function, no abstraction). Goal ≤ 2.
 * Both loops run over the same pool of spectra, alternating rounds; the best round of each counts.
 * Headline figures use the process CPU time (one core's throughput); wall-clock figures are printed too.
 */
import { cpus, loadavg } from 'node:os';
import { fitPca, createProjector } from '../../core/pca/index.ts';
import { fitChain, savgolAllPositions } from '../../core/preprocess/index.ts';
import { syntheticSpectra } from './core-pca.ts';

export const name = 'core-score';

const P = 1024;
const WINDOW = 15;
const A = 8;

/**
 * The same arithmetic as chain + projector, written as plain loops over typed arrays with the same
 * loop blocking (four components per pass), so the ratio measures the cost of the abstractions.
 */
function makeBare(model: ReturnType<typeof fitPca>, step: number): (raw: Float64Array) => number {
  const w = WINDOW;
  const half = (w - 1) / 2;
  const all = savgolAllPositions(w, 2, 2);
  const scale = 1 / (step * step);
  const coef = Float64Array.from(all, (v) => v * scale);
  const centre = coef.slice(half * w, (half + 1) * w);
  const d = new Float64Array(P);
  const e = new Float64Array(P);
  const t = new Float64Array(A);
  const mean = Float64Array.from(model.mean);
  const PT = new Float64Array(A * P);
  for (let j = 0; j < P; j++) for (let a = 0; a < A; a++) PT[a * P + j] = model.loadings.data[j * A + a]!;
  const invL = Float64Array.from(model.eigenvalues, (v) => 1 / v);
  const tail = P - w;
  // One small function per stage (V8 optimizes small hot functions best), plain loops inside.
  const savgol = (raw: Float64Array): void => {
    for (let i = 0; i < half; i++) {
      let s = 0;
      for (let k = 0; k < w; k++) s += coef[i * w + k]! * raw[k]!;
      d[i] = s;
    }
    for (let i = half; i < P - half; i++) {
      let s = 0;
      const b = i - half;
      for (let k = 0; k < w; k++) s += centre[k]! * raw[b + k]!;
      d[i] = s;
    }
    for (let i = P - half; i < P; i++) {
      let s = 0;
      const off = (i - tail) * w;
      for (let k = 0; k < w; k++) s += coef[off + k]! * raw[tail + k]!;
      d[i] = s;
    }
  };
  const snvAndCentre = (): void => {
    let sum = 0;
    for (let j = 0; j < P; j++) sum += d[j]!;
    const m = sum / P;
    let ss = 0;
    for (let j = 0; j < P; j++) {
      const v = d[j]! - m;
      ss += v * v;
    }
    const inv = 1 / Math.sqrt(ss / (P - 1));
    for (let j = 0; j < P; j++) e[j] = (d[j]! - m) * inv - mean[j]!;
  };
  // scores and residual four components per pass (A = 8: two passes each)
  const project = (): number => {
    let t2 = 0;
    for (let a = 0; a < A; a += 4) {
      const o0 = a * P, o1 = o0 + P, o2 = o1 + P, o3 = o2 + P;
      let s0 = 0, s1 = 0, s2 = 0, s3 = 0;
      for (let j = 0; j < P; j++) {
        const v = e[j]!;
        s0 += v * PT[o0 + j]!;
        s1 += v * PT[o1 + j]!;
        s2 += v * PT[o2 + j]!;
        s3 += v * PT[o3 + j]!;
      }
      t[a] = s0; t[a + 1] = s1; t[a + 2] = s2; t[a + 3] = s3;
      t2 += s0 * s0 * invL[a]! + s1 * s1 * invL[a + 1]! + s2 * s2 * invL[a + 2]! + s3 * s3 * invL[a + 3]!;
    }
    for (let a = 0; a < A; a += 4) {
      const o0 = a * P, o1 = o0 + P, o2 = o1 + P, o3 = o2 + P;
      const s0 = t[a]!, s1 = t[a + 1]!, s2 = t[a + 2]!, s3 = t[a + 3]!;
      for (let j = 0; j < P; j++) e[j] -= s0 * PT[o0 + j]! + s1 * PT[o1 + j]! + s2 * PT[o2 + j]! + s3 * PT[o3 + j]!;
    }
    let q = 0;
    for (let j = 0; j < P; j++) q += e[j]! * e[j]!;
    return t2 + q;
  };
  return (raw: Float64Array): number => {
    savgol(raw);
    snvAndCentre();
    return project();
  };
}

export async function run(ctx: { quick: boolean; log(line: string): void }): Promise<Record<string, number | string>> {
  const step = 1.5;
  const axis = Array.from({ length: P }, (_, j) => 1100 + step * j);
  const cal = syntheticSpectra(2000, P, 11);
  const chain = fitChain([{ step: 'savgol', window: WINDOW, polyorder: 2, deriv: 2 }, { step: 'snv' }], axis, cal);
  const pre = chain.applyMatrix(cal);
  const model = fitPca(pre, { components: A });
  const projector = createProjector(model);
  const poolRows = 500;
  const pool = syntheticSpectra(poolRows, P, 12);
  const rows = Array.from({ length: poolRows }, (_, i) => pool.data.subarray(i * P, (i + 1) * P));
  const buf = new Float64Array(chain.outputAxis.length);
  const bare = makeBare(model, step);

  // Same numbers from both paths (checked before timing, so the bare loop is a fair twin).
  const r0 = projector.project(chain.apply(rows[0]!, buf));
  const b0 = bare(rows[0]!);
  if (Math.abs(r0.t2 + r0.q - b0) > 1e-9 * Math.abs(b0)) throw new Error(`bare loop disagrees with chain + projector: ${b0} vs ${r0.t2 + r0.q}`);

  const perRound = ctx.quick ? 10000 : 40000;
  const rounds = ctx.quick ? 3 : 5;
  let sink = 0;
  // ms per spectrum, best round; CPU time (process.cpuUsage) is what one core delivers, wall time
  // additionally counts time the shared machine gave to other processes.
  const best = { lib: Infinity, bare: Infinity, libWall: Infinity, bareWall: Infinity };
  const timeRound = (f: () => void): { cpu: number; wall: number } => {
    const c = process.cpuUsage();
    const t = performance.now();
    f();
    const wall = (performance.now() - t) / perRound;
    const dc = process.cpuUsage(c);
    return { cpu: (dc.user + dc.system) / 1000 / perRound, wall };
  };
  ctx.log(`load average before: ${loadavg().map((v) => v.toFixed(1)).join(' ')} on ${cpus().length} cores`);
  for (let r = 0; r < rounds; r++) {
    const a = timeRound(() => {
      for (let i = 0; i < perRound; i++) {
        const res = projector.project(chain.apply(rows[i % poolRows]!, buf));
        sink += res.t2 + res.q;
      }
    });
    const b = timeRound(() => {
      for (let i = 0; i < perRound; i++) sink += bare(rows[i % poolRows]!);
    });
    best.lib = Math.min(best.lib, a.cpu);
    best.libWall = Math.min(best.libWall, a.wall);
    best.bare = Math.min(best.bare, b.cpu);
    best.bareWall = Math.min(best.bareWall, b.wall);
  }
  ctx.log(`chain + projector: ${(best.lib * 1000).toFixed(2)} µs CPU (${(best.libWall * 1000).toFixed(2)} µs wall) per spectrum; bare loop: ${(best.bare * 1000).toFixed(2)} µs CPU (${(best.bareWall * 1000).toFixed(2)} µs wall) (checksum ${sink.toExponential(3)})`);
  return {
    score_per_s: 1000 / best.lib,
    score_vs_bare: best.lib / best.bare,
    score_per_s_wall: 1000 / best.libWall,
    score_vs_bare_wall: best.libWall / best.bareWall,
    score_us_per_spectrum: best.lib * 1000,
    score_bare_us_per_spectrum: best.bare * 1000,
  };
}

if (import.meta.url === `file://${process.argv[1]}`) {
  run({ quick: process.argv.includes('--quick'), log: (l) => console.log(l) }).then((r) => console.log(r));
}
