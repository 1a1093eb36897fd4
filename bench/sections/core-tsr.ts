/**
 * Scoring a spectrum with missing variables, one spectrum at a time on one core:
 * - tsr_vs_full_projection: the cost of trimmed score regression (core/pca/tsr-projector.ts) with
 *   10 of 1,024 variables missing (a few bad pixels), over the ordinary projection (the projector
 *   the monitor uses on a clean spectrum), both on 8 PCs and the same spectra, alternating rounds,
 *   best round of each (process CPU time). Goal ≤ 2: a damaged spectrum should cost about what a
 *   clean one does.
 * - tsr_vs_full_projection_50: the same with 50 missing (about the most a spectrum may have and
 *   still be judged, 5 %).
 * - pixel_check_vs_full_projection: the pixel-quality check (core/quality/pixel-quality.ts) over
 *   the projection, on the raw spectra.
 */
import { fitPca, createProjector } from '../../core/pca/index.ts';
import { createTsrProjector } from '../../core/pca/tsr-projector.ts';
import { createPixelQualityChecker } from '../../core/quality/pixel-quality.ts';
import { syntheticSpectra } from './core-pca.ts';

export const name = 'core-tsr';

const P = 1024;
const A = 8;

export async function run(ctx: { quick: boolean; log(line: string): void }): Promise<Record<string, number | string>> {
  const n = ctx.quick ? 200 : 400;
  const X = syntheticSpectra(n, P, 7);
  const model = fitPca(X, { components: A, center: true, seed: 1 });
  const pool = Array.from({ length: 64 }, (_, i) => X.data.subarray((i % n) * P, (i % n + 1) * P));
  const full = createProjector(model);
  const tsr = createTsrProjector(model);
  const checker = createPixelQualityChecker(P);
  const mask10 = new Uint8Array(P);
  const mask50 = new Uint8Array(P);
  for (let k = 0; k < 10; k++) mask10[37 + 97 * k] = 1;
  for (let k = 0; k < 50; k++) mask50[11 + 20 * k] = 1;
  let sink = 0;
  const perRound = ctx.quick ? 2000 : 10000;
  const time = (f: (x: Float64Array) => number): number => {
    const c = process.cpuUsage();
    for (let i = 0; i < perRound; i++) sink += f(pool[i & 63]!);
    const dc = process.cpuUsage(c);
    return (dc.user + dc.system) / 1000 / perRound;
  };
  const fFull = (x: Float64Array): number => full.project(x).t2;
  const f10 = (x: Float64Array): number => tsr.project(x, mask10).t2;
  const f50 = (x: Float64Array): number => tsr.project(x, mask50).t2;
  const fCheck = (x: Float64Array): number => checker.check(x).bad;
  const best = { full: Infinity, t10: Infinity, t50: Infinity, check: Infinity };
  const rounds = ctx.quick ? 5 : 15;
  for (let r = 0; r < rounds; r++) {
    best.full = Math.min(best.full, time(fFull));
    best.t10 = Math.min(best.t10, time(f10));
    best.t50 = Math.min(best.t50, time(f50));
    best.check = Math.min(best.check, time(fCheck));
  }
  ctx.log(`projection ${(best.full * 1000).toFixed(2)} µs, TSR 10 missing ${(best.t10 * 1000).toFixed(2)} µs, 50 missing ${(best.t50 * 1000).toFixed(2)} µs, pixel check ${(best.check * 1000).toFixed(2)} µs CPU per spectrum (${P} points, ${A} PCs; checksum ${sink.toExponential(3)})`);
  return {
    tsr_vs_full_projection: best.t10 / best.full,
    tsr_vs_full_projection_50: best.t50 / best.full,
    pixel_check_vs_full_projection: best.check / best.full,
    tsr_us_per_spectrum: best.t10 * 1000,
    full_projection_us_per_spectrum: best.full * 1000,
  };
}
