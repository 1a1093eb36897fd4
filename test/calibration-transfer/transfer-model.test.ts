/**
 * A transferred monitoring model (core/calibration-transfer/transfer-model.ts): the source model with
 * a PDS transform in front, as a new model file whose hash covers the transform; its chain on the
 * new analyzer's spectra agrees with the source chain on numpy's transferred spectra
 * (scripts/fixtures/calibration-transfer-numpy.py, Wang, Veltkamp & Kowalski 1991), and its
 * judgement on held-out transfer sets shows the T², Q and property error before and after.
 */
import { spawnSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { simulateBatch } from '../../simulators/batch.ts';
import { simulateOnSecondAnalyzer } from '../../simulators/second-analyzer.ts';
import { fitTransfer, type TransferSet } from '../../core/calibration-transfer/transfer-model.ts';
import { parseMonitoringModel, serializeMonitoringModel, withTransfer } from '../../core/model/monitoring-model.ts';
import { readModelFile, ModelFileError } from '../../core/model/model-file.ts';
import { z } from 'zod';
import { buildSmallDryerModel } from '../server/model-fixture.ts';

const SCRIPT = fileURLToPath(new URL('../../scripts/fixtures/calibration-transfer-numpy.py', import.meta.url));

/** A transfer set: every `every`-th spectrum of one simulated batch, on both analyzers, with its true moisture as lab value. */
function transferSet(seed: number, every: number): TransferSet {
  const a = simulateBatch('dryer', { seed, intervalS: 60 });
  const b = simulateOnSecondAnalyzer('dryer', { seed, intervalS: 60 });
  const idx = a.spectra.map((_, i) => i).filter((i) => i % every === 0);
  return {
    old: `T-OLD-${seed}`, new: `T-NEW-${seed}`, oldAxis: a.axis, newAxis: b.axis,
    oldSpectra: idx.map((i) => a.spectra[i]!), newSpectra: idx.map((i) => b.spectra[i]!), property: idx.map((i) => a.truth.property.values[i]!),
  };
}

describe('a transferred model version', () => {
  const { model: source } = buildSmallDryerModel(11);
  const fit = [transferSet(921, 6), transferSet(922, 6), transferSet(923, 6)];
  const heldOut = [transferSet(931, 3), transferSet(932, 3)];
  const transfer = fitTransfer(source, { method: 'pds', window: 7, rcond: 1e-4, fit, heldOut, source: { versionId: 'v-src', version: 1 }, author: 'test', createdAt: 5 });
  const moved = withTransfer(source, transfer);
  const text = serializeMonitoringModel(moved);

  it('reads the new analyzer\'s axis, is a version-2 file with its own hash, and round-trips', () => {
    expect(moved.version).toBe(2);
    expect(Array.from(moved.chain.inputAxis)).toEqual(fit[0]!.newAxis);
    expect(Array.from(moved.chain.outputAxis)).toEqual(Array.from(source.chain.outputAxis));
    expect(moved.sha256).not.toBe(source.sha256);
    const back = parseMonitoringModel(text);
    expect(back.sha256).toBe(moved.sha256);
    expect(back.transfer!.source).toEqual({ modelId: source.id, sha256: source.sha256, name: source.settings.name, version: 1, versionId: 'v-src' });
    expect(back.transfer!.fit.map((f) => f.old)).toEqual(fit.map((f) => f.old));
    // A reader that knows only version 1 refuses the file instead of ignoring the transform.
    expect(() => readModelFile(text, 'tideline-monitoring-model', [1], z.unknown())).toThrow(ModelFileError);
  });

  it('the hash covers the transform: one changed coefficient is refused', () => {
    const doc = JSON.parse(text);
    doc.body.transfer.transform.coef[10] += 1e-6;
    expect(() => parseMonitoringModel(JSON.stringify(doc))).toThrow(/hash mismatch/);
  });

  it("its chain on a new-analyzer spectrum equals the source chain on numpy's PDS transfer of it (1e-9)", () => {
    const rows = (xs: ArrayLike<number>[]) => xs.map((x) => Array.from(x));
    const fresh = simulateOnSecondAnalyzer('dryer', { seed: 941, intervalS: 60 }).spectra.filter((_, i) => i % 25 === 3);
    const r = spawnSync('python3', [SCRIPT], {
      input: JSON.stringify({
        master_axis: fit[0]!.oldAxis, slave_axis: fit[0]!.newAxis, master: rows(fit.flatMap((s) => s.oldSpectra)), slave: rows(fit.flatMap((s) => s.newSpectra)),
        rcond: 1e-4, max_rank: null, window: 7, new_slave: rows(fresh),
      }),
      encoding: 'utf8', maxBuffer: 256 * 1024 * 1024,
    });
    if (r.status !== 0) throw new Error(`python3 ${SCRIPT} failed: ${r.stderr}`);
    const ref = JSON.parse(r.stdout) as { pds: { transferred: number[][] } };
    const p = moved.chain.outputAxis.length;
    const a = new Float64Array(p);
    const b = new Float64Array(p);
    fresh.forEach((x, i) => {
      moved.chain.apply(x, a);
      source.chain.apply(ref.pds.transferred[i]!, b);
      for (let j = 0; j < p; j++) expect(Math.abs(a[j]! - b[j]!)).toBeLessThan(1e-9 * Math.max(1, Math.abs(b[j]!)));
    });
    // The property model predicts from the new analyzer's spectra through the same transform.
    expect(moved.pls!.predict(fresh[0]!).y).toBeCloseTo(source.pls!.predict(ref.pds.transferred[0]!).y, 9);
  });

  it('judged on held-out sets: most spectra beyond a limit before, near the old analyzer after; property error smaller', () => {
    const j = moved.transfer!.judgement;
    console.log(`held-out transfer samples ${j.spectra}: beyond T² or Q old ${j.old.beyond}, before ${j.before.beyond}, after ${j.after.beyond}; moisture RMS vs old ${j.property!.vsOld.before.toFixed(3)} → ${j.property!.vsOld.after.toFixed(3)}; vs lab ${JSON.stringify(j.property!.vsLab)}`);
    expect(j.spectra).toBe(heldOut.reduce((s, h) => s + h.oldSpectra.length, 0));
    expect(j.before.rate).toBeGreaterThan(0.5);
    expect(j.after.rate).toBeLessThan(0.1);
    expect(j.farAbove).toBe(false);
    expect(j.spectralRms.after).toBeLessThan(j.spectralRms.before / 5);
    expect(j.property!.vsOld.after).toBeLessThan(j.property!.vsOld.before);
    expect(j.property!.vsLab!.n).toBe(j.spectra);
  });

  it('refuses what cannot be a transfer, naming it', () => {
    const opts = { method: 'pds' as const, window: 7, fit, heldOut, source: { versionId: null, version: null }, author: 't', createdAt: 0 };
    expect(() => fitTransfer(source, { ...opts, heldOut: [] })).toThrow(/held-out transfer set/);
    expect(() => fitTransfer(source, { ...opts, heldOut: [fit[0]!] })).toThrow(/both fitted on and held out/);
    expect(() => fitTransfer(source, { ...opts, window: undefined })).toThrow(/PDS needs a window/);
    const short = { ...heldOut[0]!, newSpectra: heldOut[0]!.newSpectra.slice(1) };
    expect(() => fitTransfer(source, { ...opts, heldOut: [short] })).toThrow(/same samples, row for row/);
    const swapped = { ...fit[0]!, oldAxis: fit[0]!.newAxis, oldSpectra: fit[0]!.newSpectra };
    expect(() => fitTransfer(source, { ...opts, fit: [swapped] })).toThrow(/must be on the axis the model was built on/);
    expect(() => fitTransfer(moved, opts)).toThrow(/already carries a calibration transfer/);
  });
});
