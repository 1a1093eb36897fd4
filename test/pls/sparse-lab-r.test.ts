/**
 * PLS on sparse lab values, checked against R's pls package (Mevik & Wehrens 2007, J. Stat. Softw.
 * 18(2); Debian r-cran-pls) on the same rows: a few lab values per simulated dryer batch (every
 * ~25th spectrum, as loss-on-drying results arrive at a site), the rows Tideline calibrates on and
 * their preprocessed spectra written to a temporary file, then
 * `plsr(y ~ X, validation = "CV", segments = <one segment per batch>)` in R: RMSECV per LV count
 * (R's RMSEP(…, "CV"), the intercept-only model first), the cross-validated predictions, the bias
 * (mean CV residual) and the regression vector of the final model. The one-standard-error choice
 * (Hastie, Tibshirani & Friedman 2009, ESL §7.10) is recomputed with numpy from R's predictions.
 * Skipped with a message where Rscript or the pls package is absent (like test/pls/gasoline.test.ts).
 */
import { spawnSync, execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { simulateReferenceSet } from '../../simulators/batch.ts';
import { fitPropertyModel } from '../../core/model/property-model.ts';
import { matrixFromRows } from '../../core/linalg/dense-matrix.ts';

function rAvailable(): string | null {
  const probe = spawnSync('Rscript', ['-e', 'suppressMessages(library(pls))'], { encoding: 'utf8' });
  if (probe.error) return `Rscript not found (${probe.error.message}); install r-base-core r-cran-pls`;
  if (probe.status !== 0) return `R package pls not installed (${probe.stderr.trim().split('\n').pop()}); install r-cran-pls`;
  return null;
}
const skip = rAvailable();
if (skip) console.warn(`SKIPPED sparse-lab PLS check against R pls: ${skip}`);

// Six simulated dryer batches; lab values on every 25th spectrum from a batch-dependent offset.
const ref = simulateReferenceSet('dryer', 6, 4711);
const rows: ArrayLike<number>[] = [];
const y: number[] = [];
const batchOfRow: number[] = [];
ref.forEach((b, bi) => b.spectra.forEach((s, i) => {
  rows.push(s);
  batchOfRow.push(bi);
  y.push((i + 3 * bi) % 25 === 0 ? b.truth.property.values[i]! : NaN);
}));
const spec = { name: 'moisture', unit: '% w/w', components: 'auto' as const };
const chain = [{ step: 'msc' as const }, { step: 'scale' as const, center: true, scaling: 'none' as const }];
const dir = mkdtempSync(join(tmpdir(), 'tideline-sparse-pls-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe.skipIf(skip !== null)('PLS on sparse lab values, leave-one-batch-out, against R pls', () => {
  const fit = fitPropertyModel({ axis: ref[0]!.axis, rows, y, batchOfRow, batchIds: ref.map((b) => b.id) }, spec, chain);
  const ev = fit.model.evidence!;
  const cal = fit.calibrationRows;
  const Xcal = fit.chain.applyMatrix(matrixFromRows(cal.map((i) => rows[i]!)));
  const ycal = cal.map((i) => y[i]!);
  const A = ev.rmsecv.length;
  const file = join(dir, 'cal.csv');
  writeFileSync(file, cal.map((i, r) => [batchOfRow[i], ycal[r], ...Array.from(Xcal.data.subarray(r * Xcal.cols, (r + 1) * Xcal.cols))].map((v) => Number(v).toPrecision(17)).join(',')).join('\n'));
  const out = spawnSync('Rscript', ['-e', `
suppressMessages(library(pls))
d <- as.matrix(read.csv("${file}", header = FALSE))
g <- d[, 1]; yy <- d[, 2]; X <- d[, -(1:2)]
segs <- lapply(unique(g), function(b) which(g == b))
m <- plsr(yy ~ X, ncomp = ${A}, validation = "CV", segments = segs)
cat("RMSECV", sprintf("%.17g", RMSEP(m, estimate = "CV")$val[1, 1, ]), sep = ",", "\\n")
pr <- m$validation$pred[, 1, ]
cat("BIAS", sprintf("%.17g", colMeans(pr - yy)), sep = ",", "\\n")
for (i in 1:nrow(pr)) cat("PRED", sprintf("%.17g", pr[i, ]), sep = ",", "\\n")
cat("COEF", sprintf("%.17g", coef(m, ncomp = ${fit.model.components}, intercept = TRUE)), sep = ",", "\\n")
`], { encoding: 'utf8', maxBuffer: 64 * 1024 * 1024 });
  if (out.status !== 0) throw new Error(`Rscript failed: ${out.stderr}`);
  const R: Record<string, number[][]> = {};
  for (const line of out.stdout.trim().split('\n')) {
    const parts = line.trim().split(',').map((s) => s.trim()).filter((s) => s.length);
    (R[parts[0]!] ??= []).push(parts.slice(1).map(Number));
  }

  it('calibrates on the lab rows only, one fold per batch', () => {
    expect(cal.every((i) => Number.isFinite(y[i]!))).toBe(true);
    expect(cal.length).toBe(y.filter(Number.isFinite).length);
    expect(ev.nLabValues).toBe(cal.length);
    expect(ev.nBatchesWithLab).toBe(6);
    expect(ev.cvMethod).toMatch(/^leave-one-batch-out: 6 folds/);
  });
  it('RMSECV per LV equals R pls to 1e-8 relative', () => {
    const r = R.RMSECV![0]!;
    expect(r.length).toBe(A + 1);
    for (let a = 1; a <= A; a++) expect(Math.abs(ev.rmsecv[a - 1]! / r[a]! - 1), `a=${a}`).toBeLessThan(1e-8);
  });
  it('RMSECV with no LV predicts each batch by the mean of the others (numpy); R lists the leave-one-out form instead', () => {
    // R's mvrCv sets PRESS0 = var(y)·n²/(n − 1) whatever the segments (the leave-one-out value).
    const code = `
import json, numpy as np
y = np.array(${JSON.stringify(ycal)}); g = np.array(${JSON.stringify(cal.map((i) => batchOfRow[i]))})
e = np.concatenate([y[g == b] - y[g != b].mean() for b in np.unique(g)])
print(json.dumps([float(np.sqrt((e**2).mean())), float(np.sqrt(y.var(ddof=1) * len(y) / (len(y) - 1)))]))`;
    const [seg, loo] = JSON.parse(execFileSync('python3', ['-c', code], { encoding: 'utf8' })) as number[];
    expect(Math.abs(ev.rmsecv0 / seg! - 1)).toBeLessThan(1e-10);
    expect(Math.abs(R.RMSECV![0]![0]! / loo! - 1)).toBeLessThan(1e-10);
  });
  it('cross-validated predictions and the bias (mean CV residual) equal R pls', () => {
    const pred = R.PRED!;
    expect(pred.length).toBe(cal.length);
    for (let a = 1; a <= A; a++) for (let r = 0; r < cal.length; r++) expect(Math.abs(fit.cv.predictions[a - 1]![r]! - pred[r]![a - 1]!)).toBeLessThan(1e-8);
    R.BIAS![0]!.forEach((b, a) => expect(Math.abs(ev.bias[a]! - b)).toBeLessThan(1e-9));
  });
  it('the final model has R\'s regression vector', () => {
    const coef = R.COEF![0]!;
    // R: intercept then coefficients on the (already preprocessed) X
    const probe = Array.from({ length: Xcal.cols }, (_, j) => coef[j + 1]!);
    const m = fit.model;
    // prediction of each calibration spectrum through the model vs R's linear form
    cal.slice(0, 10).forEach((i, r) => {
      let yr = coef[0]!;
      for (let j = 0; j < Xcal.cols; j++) yr += probe[j]! * Xcal.data[r * Xcal.cols + j]!;
      expect(Math.abs(m.predict(rows[i]!).y - yr)).toBeLessThan(1e-8);
    });
  });
  it('the LV count is the one-standard-error choice over the batch folds, recomputed with numpy from R\'s predictions', () => {
    const code = `
import json, numpy as np
pred = np.array(${JSON.stringify(R.PRED)}); y = np.array(${JSON.stringify(ycal)}); g = np.array(${JSON.stringify(cal.map((i) => batchOfRow[i]))})
mse = ((pred - y[:, None])**2).mean(axis=0)
folds = [((pred[g == b] - y[g == b][:, None])**2).mean(axis=0) for b in np.unique(g)]
F = np.array(folds)
best = int(np.argmin(mse))
se = F[:, best].std(ddof=1) / np.sqrt(F.shape[0])
print(json.dumps(int(np.nonzero(mse <= mse[best] + se)[0][0]) + 1))`;
    const chosen = JSON.parse(execFileSync('python3', ['-c', code], { encoding: 'utf8' })) as number;
    expect(fit.model.components).toBe(chosen);
    expect(ev.componentsRule).toMatch(/^one-standard-error rule \(Hastie, Tibshirani & Friedman 2009/);
  });
});
