/**
 * Direct and piecewise direct standardisation (Wang, Veltkamp & Kowalski 1991, Anal. Chem.
 * 63:2750) against numpy (scripts/fixtures/calibration-transfer-numpy.py, run here through
 * python3), on transfer samples of a simulated dryer measured by the first analyzer and by a second
 * one with another grid, a shifted wavelength calibration, a broader line shape, another gain and
 * offset (simulators/second-analyzer.ts); then the master's model judging the second analyzer's good
 * batches with and without PDS.
 */
import { spawnSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import { beforeAll, describe, expect, it } from 'vitest';
import { simulateBatch, simulateReferenceSet } from '../../simulators/batch.ts';
import { simulateOnSecondAnalyzer } from '../../simulators/second-analyzer.ts';
import { matrixFromRows } from '../../core/linalg/dense-matrix.ts';
import { applyStandardisation, fitDirectStandardisation, fitPiecewiseDirectStandardisation, type TransferSamples } from '../../core/calibration-transfer/standardisation.ts';
import { buildMonitoringModel, type MonitoringModel } from '../../core/model/monitoring-model.ts';
import { createBatchMonitor } from '../../core/monitor/batch-monitor.ts';
import { DRYER_TEST_SETTINGS } from '../monitor/settings-fixture.ts';

const SCRIPT = fileURLToPath(new URL('../../scripts/fixtures/calibration-transfer-numpy.py', import.meta.url));

function transferSamples(seeds: number[], perBatch: number): TransferSamples {
  const m: Float32Array[] = [];
  const s: Float32Array[] = [];
  let axes: { master: number[]; slave: number[] } | null = null;
  for (const seed of seeds) {
    const a = simulateBatch('dryer', { seed });
    const b = simulateOnSecondAnalyzer('dryer', { seed });
    axes = { master: a.axis, slave: b.axis };
    for (let k = 0; k < perBatch; k++) {
      const i = Math.floor((k * (a.spectra.length - 1)) / (perBatch - 1));
      m.push(a.spectra[i]!);
      s.push(b.spectra[i]!);
    }
  }
  return { masterAxis: axes!.master, slaveAxis: axes!.slave, master: matrixFromRows(m), slave: matrixFromRows(s) };
}

function rows(m: { data: Float64Array; rows: number; cols: number }): number[][] {
  return Array.from({ length: m.rows }, (_, i) => Array.from(m.data.subarray(i * m.cols, (i + 1) * m.cols)));
}

function maxAbs(a: ArrayLike<number>): number {
  let m = 0;
  for (let i = 0; i < a.length; i++) m = Math.max(m, Math.abs(a[i]!));
  return m;
}

describe('DS and PDS against numpy', () => {
  const samples = transferSamples([901, 902], 12);
  const fresh = simulateOnSecondAnalyzer('dryer', { seed: 903 }).spectra.filter((_, i) => i % 60 === 5);
  const rcond = 1e-4;
  const window = 7;
  const r = spawnSync('python3', [SCRIPT], {
    input: JSON.stringify({ master_axis: samples.masterAxis, slave_axis: samples.slaveAxis, master: rows(samples.master), slave: rows(samples.slave), rcond, max_rank: null, window, new_slave: fresh.map((x) => Array.from(x)) }),
    encoding: 'utf8',
    maxBuffer: 256 * 1024 * 1024,
  });
  if (r.status !== 0) throw new Error(`python3 ${SCRIPT} failed: ${r.stderr}`);
  const ref = JSON.parse(r.stdout) as { ds: { F: number[][]; offset: number[]; rank: number; transferred: number[][] }; pds: { start: number[]; coef: number[][]; offset: number[]; ranks: number[]; transferred: number[][] } };

  it('DS: the same transform, offset, rank and transferred spectra (1e-9 of the largest entry)', () => {
    const ds = fitDirectStandardisation(samples, { rcond });
    expect(ds.rank).toBe(ref.ds.rank);
    const p1 = samples.masterAxis.length as number;
    const F = ref.ds.F.flat();
    const scale = maxAbs(F);
    let d = 0;
    for (let k = 0; k < F.length; k++) d = Math.max(d, Math.abs(ds.F[k]! - F[k]!));
    expect(d).toBeLessThan(1e-9 * scale);
    for (let j = 0; j < p1; j++) expect(Math.abs(ds.offset[j]! - ref.ds.offset[j]!)).toBeLessThan(1e-9 * Math.max(1, maxAbs(ref.ds.offset)));
    fresh.forEach((x, i) => {
      const y = applyStandardisation(ds, x);
      for (let j = 0; j < p1; j++) expect(Math.abs(y[j]! - ref.ds.transferred[i]![j]!)).toBeLessThan(1e-9);
    });
  });

  it('PDS: the same windows, coefficients, offsets, ranks and transferred spectra across the change of axis', () => {
    const pds = fitPiecewiseDirectStandardisation(samples, { rcond, window });
    const p1 = samples.masterAxis.length as number;
    expect(Array.from(pds.start)).toEqual(ref.pds.start);
    expect(Array.from(pds.ranks)).toEqual(ref.pds.ranks);
    const coef = ref.pds.coef.flat();
    const scale = maxAbs(coef);
    for (let k = 0; k < coef.length; k++) expect(Math.abs(pds.coef[k]! - coef[k]!)).toBeLessThan(1e-9 * scale);
    for (let j = 0; j < p1; j++) expect(Math.abs(pds.offset[j]! - ref.pds.offset[j]!)).toBeLessThan(1e-9 * Math.max(1, maxAbs(ref.pds.offset)));
    const out = new Float64Array(p1);
    fresh.forEach((x, i) => {
      applyStandardisation(pds, x, out);
      for (let j = 0; j < p1; j++) expect(Math.abs(out[j]! - ref.pds.transferred[i]![j]!)).toBeLessThan(1e-9);
    });
  });

  it('names bad input', () => {
    const short = { ...samples, slave: matrixFromRows(rows(samples.slave).slice(1)) };
    expect(() => fitDirectStandardisation(short)).toThrow(/24 master transfer spectra but 23 slave ones/);
    expect(() => fitPiecewiseDirectStandardisation(samples, { window: 6 })).toThrow(/window = 6 must be an odd/);
    const narrow = { ...samples, slaveAxis: Array.from(samples.slaveAxis as number[], (l) => l + 100) };
    expect(() => fitPiecewiseDirectStandardisation(narrow, { window: 5 })).toThrow(/master wavelength 950 nm lies outside the slave axis/);
  });
});

describe("the master's model on the second analyzer", () => {
  let model: MonitoringModel;
  beforeAll(() => {
    const ref = simulateReferenceSet('dryer', 6, 11);
    model = buildMonitoringModel(ref.map((b) => ({ id: b.id, axis: b.axis, times: b.times, spectra: b.spectra, property: b.truth.property.values })), DRYER_TEST_SETTINGS);
  }, 120_000);

  it('without transfer most spectra of good batches are beyond the Q limit; with PDS the rate is back near nominal', () => {
    const samples = transferSamples([911, 912, 913], 10);
    const pds = fitPiecewiseDirectStandardisation(samples, { window: 7, rcond: 1e-4 });
    const master = samples.masterAxis as number[];
    const slave = samples.slaveAxis as number[];
    // without transfer: the second analyzer's spectra linearly interpolated onto the model's axis
    const naive = (x: Float32Array): Float64Array => Float64Array.from(master, (l) => {
      let k = 0;
      while (k < slave.length - 2 && slave[k + 1]! < l) k++;
      const f = (l - slave[k]!) / (slave[k + 1]! - slave[k]!);
      return x[k]! + f * (x[k + 1]! - x[k]!);
    });
    let n = 0;
    const out = { naive: 0, pds: 0, naiveBatches: 0, pdsBatches: 0 };
    for (const seed of [777001, 777002, 777003, 777004]) {
      const b = simulateOnSecondAnalyzer('dryer', { seed });
      const a = createBatchMonitor(model, b.times[0]!);
      const c = createBatchMonitor(model, b.times[0]!);
      let alarmA = false;
      let alarmC = false;
      b.spectra.forEach((x, i) => {
        const ra = a.push(i, b.times[i]!, naive(x));
        const rc = c.push(i, b.times[i]!, applyStandardisation(pds, x));
        n++;
        if (ra.q > ra.limits.q || ra.t2 > ra.limits.t2) out.naive++;
        if (rc.q > rc.limits.q || rc.t2 > rc.limits.t2) out.pds++;
        if (ra.conditionChanges.some((ch) => ch.active)) alarmA = true;
        if (rc.conditionChanges.some((ch) => ch.active)) alarmC = true;
      });
      if (alarmA) out.naiveBatches++;
      if (alarmC) out.pdsBatches++;
    }
    console.log(`second analyzer, ${n} spectra of 4 good batches beyond the 99 % T² or Q limit: without transfer ${out.naive}, with PDS ${out.pds}; batches with an alarm ${out.naiveBatches} vs ${out.pdsBatches}`);
    expect(out.naive / n).toBeGreaterThan(0.5);
    expect(out.naiveBatches).toBe(4);
    expect(out.pds / n).toBeLessThan(0.05);
  }, 120_000);
});
