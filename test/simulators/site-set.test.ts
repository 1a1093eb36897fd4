/**
 * The site-style set writer (simulators/site-set.ts): the files parse with Python's csv module (an
 * outside reader) and with Tideline's importer, the wavelengths are rounded to 0.01 nm on an axis
 * unlike the dryer simulator's, the lab moisture is sparse (a few LOD results per batch, more near
 * the end, within the stated lab error of the true moisture), operators stop 5–15 min after the true
 * endpoint, the instrument has its own line shape, stray light and noise, and the same seed gives
 * the same bytes.
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, readdirSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { readBatchCsv } from '../../core/io/batch-csv.ts';
import { DRYER_AXIS } from '../../simulators/bands.ts';
import { Rng } from '../../simulators/prng.ts';
import { SITE_INSTRUMENT, SITE_LAB_ERROR, SiteInstrument, siteAxis, simulateSiteSet, writeSiteSet, type SiteSet } from '../../simulators/site-set.ts';
import { runPython } from './python.ts';

const tmp = mkdtempSync(join(tmpdir(), 'tideline-site-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));

const SMALL = { seed: 5, reference: 4, good: 1, perFault: 1, faults: ['slow-drying', 'dropout', 'wrong-material'] as const };
let set: SiteSet;
beforeAll(() => {
  set = simulateSiteSet({ ...SMALL, faults: [...SMALL.faults] });
  writeSiteSet(join(tmp, 'a'), set);
});

function readAll(dir: string): Record<string, Buffer> {
  const out: Record<string, Buffer> = {};
  const walk = (d: string, prefix: string) => {
    for (const e of readdirSync(d, { withFileTypes: true }).sort((x, y) => x.name.localeCompare(y.name))) {
      if (e.isDirectory()) walk(join(d, e.name), `${prefix}${e.name}/`);
      else out[prefix + e.name] = readFileSync(join(d, e.name));
    }
  };
  walk(dir, '');
  return out;
}

/** Every spectra file of the set, read by Python's csv module. */
interface PyFile {
  header: string[];
  widths: number[];
  batches: string[];
  time: number[];
  lab: (number | null)[];
}
function readWithPython(files: string[]): Record<string, PyFile> {
  return runPython<Record<string, PyFile>>(
    `
import csv, json, sys
out = {}
for path in json.load(sys.stdin):
    with open(path, newline='') as f:
        rows = list(csv.reader(f))
    header, body = rows[0], rows[1:]
    out[path] = {
        'header': header,
        'widths': sorted(set(len(r) for r in body)),
        'batches': sorted(set(r[0] for r in body)),
        'time': [float(r[1]) for r in body],
        'lab': [float(r[2]) if r[2] != '' else None for r in body],
    }
    [float(c) for r in body for c in r[3:]]  # every absorbance is a number
print(json.dumps(out))
`,
    files,
  );
}

describe('site-style set', () => {
  it('the same seed gives byte-identical files; another seed does not', () => {
    writeSiteSet(join(tmp, 'b'), simulateSiteSet({ ...SMALL, faults: [...SMALL.faults] }));
    writeSiteSet(join(tmp, 'c'), simulateSiteSet({ ...SMALL, faults: [...SMALL.faults], seed: 6 }));
    const a = readAll(join(tmp, 'a'));
    const b = readAll(join(tmp, 'b'));
    const c = readAll(join(tmp, 'c'));
    expect(Object.keys(a)).toEqual(Object.keys(b));
    expect(Object.keys(a)).toContain('reference/FB25-101.csv');
    expect(Object.keys(a)).toContain('truth/FB25-501.truth.json');
    for (const f of Object.keys(a)) expect(a[f]!.equals(b[f]!), f).toBe(true);
    expect(c['reference/FB25-101.csv']!.equals(a['reference/FB25-101.csv']!)).toBe(false);
  });

  it('files parse with Python csv: the site header, a rounded axis unlike the simulator’s, elapsed seconds every ~15 s', () => {
    const dir = join(tmp, 'a');
    const files = [...readdirSync(join(dir, 'reference')).map((f) => join(dir, 'reference', f)), ...readdirSync(join(dir, 'test')).map((f) => join(dir, 'test', f))];
    expect(files).toHaveLength(4 + 1 + 3);
    const py = readWithPython(files);
    for (const f of files) {
      const p = py[f]!;
      expect(p.header.slice(0, 3)).toEqual(['batch', 'time_s', 'moisture [% w/w]']);
      const wl = p.header.slice(3);
      expect(wl).toHaveLength(397);
      for (const w of wl) expect(w).toMatch(/^\d{4}\.\d{2}$/);
      expect(p.widths).toEqual([400]); // no ragged row
      expect(p.batches).toHaveLength(1);
      expect(p.time[0]).toBe(0);
      for (let i = 1; i < p.time.length; i++) expect(p.time[i]!).toBeGreaterThan(p.time[i - 1]!);
    }
    const axis = py[files[0]!]!.header.slice(3).map(Number);
    expect(axis).toEqual(siteAxis());
    expect(axis[0]).not.toBe(DRYER_AXIS[0]);
    expect(axis.length).not.toBe(DRYER_AXIS.length);
    // Rounded to 0.01 nm, the spacing is not exactly even.
    const steps = new Set(axis.slice(1).map((x, i) => (x - axis[i]!).toFixed(2)));
    expect([...steps].sort()).toEqual(['2.51', '2.52']);
    // Scan times: 15 s apart with ±0.4 s of jitter (the drop-out batch has a gap).
    const good = py[join(dir, 'reference', 'FB25-101.csv')]!;
    for (let i = 1; i < good.time.length; i++) expect(Math.abs(good.time[i]! - good.time[i - 1]! - 15)).toBeLessThanOrEqual(0.81);
  });

  it('lab moisture is sparse: a few LOD results per batch, more near the end, as in lab-results.csv, within the stated lab error', () => {
    const dir = join(tmp, 'a');
    const all = [...set.reference, ...set.test];
    const py = readWithPython(all.map((sb) => join(dir, sb.role, `${sb.batch.id}.csv`)));
    const labCsv = readFileSync(join(dir, 'lab-results.csv'), 'utf8').trimEnd().split('\n');
    expect(labCsv[0]).toBe('batch,sample_time,moisture [% w/w],method');
    let n = 0;
    for (const sb of all) {
      const b = sb.batch;
      const p = py[join(dir, sb.role, `${b.id}.csv`)]!;
      const filled = p.lab.flatMap((v, i) => (v === null ? [] : [{ v, i }]));
      expect(filled.length, b.id).toBeGreaterThanOrEqual(4);
      expect(filled.length, b.id).toBeLessThanOrEqual(14);
      expect(filled.length / p.lab.length, b.id).toBeLessThan(0.06);
      // More samples in the last third of the batch than in the first.
      const end = p.time[p.time.length - 1]!;
      const inFirst = filled.filter(({ i }) => p.time[i]! < end / 3).length;
      const inLast = filled.filter(({ i }) => p.time[i]! >= (2 * end) / 3).length;
      expect(inLast, b.id).toBeGreaterThan(inFirst);
      // The discharge sample sits on (or next to) the last spectrum.
      expect(filled[filled.length - 1]!.i, b.id).toBeGreaterThanOrEqual(p.lab.length - 3);
      // The same results, with their sample times, in lab-results.csv; each on the spectrum nearest its time.
      const rows = labCsv.filter((l) => l.startsWith(`${b.id},`)).map((l) => l.split(','));
      expect(rows.map((r) => Number(r[2]))).toEqual(filled.map(({ v }) => v));
      rows.forEach((r, k) => {
        expect(r[3]).toBe('LOD');
        const elapsedS = (Date.parse(r[1]!) - b.start) / 1000;
        const nearest = p.time.reduce((best, t, i) => (Math.abs(t - elapsedS) < Math.abs(p.time[best]! - elapsedS) ? i : best), 0);
        expect(filled[k]!.i).toBe(nearest);
      });
      // LOD − true moisture within 5 sd of the stated lab error.
      for (const l of sb.lab) {
        const sd = Math.hypot(SITE_LAB_ERROR.absPct, SITE_LAB_ERROR.rel * l.trueValue);
        expect(Math.abs(l.value - l.trueValue), `${b.id} ${l.sampleT}`).toBeLessThan(5 * sd + 0.005);
        n++;
      }
    }
    // The errors have about the stated size over all samples (not zero, not wildly more).
    const z = all.flatMap((sb) => sb.lab.map((l) => (l.value - l.trueValue) / Math.hypot(SITE_LAB_ERROR.absPct, SITE_LAB_ERROR.rel * l.trueValue)));
    const rms = Math.sqrt(z.reduce((s, v) => s + v * v, 0) / z.length);
    expect(n).toBeGreaterThan(40);
    expect(rms).toBeGreaterThan(0.6);
    expect(rms).toBeLessThan(1.5);
  });

  it('operators stop 5–15 min after the true endpoint; truth files give endpoint, stop and fault onset', () => {
    const dir = join(tmp, 'a');
    const record = readFileSync(join(dir, 'batch-record.csv'), 'utf8').trimEnd().split('\n');
    expect(record[0]).toBe('batch,role,start,stop');
    let reached = 0;
    for (const sb of [...set.reference, ...set.test]) {
      const b = sb.batch;
      const truth = JSON.parse(readFileSync(join(dir, 'truth', `${b.id}.truth.json`), 'utf8'));
      expect(truth.format).toBe('tideline-site-truth');
      expect(truth.moisture.values).toHaveLength(b.times.length);
      const csv = readFileSync(join(dir, sb.role, `${b.id}.csv`), 'utf8').trimEnd().split('\n');
      const lastElapsedS = Number(csv[csv.length - 1]!.split(',')[1]);
      const rec = record.find((l) => l.startsWith(`${b.id},`))!.split(',');
      expect(Date.parse(rec[2]!)).toBe(b.start);
      if (truth.endpoint) {
        reached++;
        // The true endpoint: the first spectrum at or below 2 % w/w.
        const i = truth.endpoint.index;
        expect(truth.moisture.values[i]).toBeLessThanOrEqual(2);
        expect(truth.moisture.values[i - 1]).toBeGreaterThan(2);
        const afterMin = (lastElapsedS - truth.endpoint.elapsedS) / 60;
        expect(afterMin, b.id).toBeGreaterThanOrEqual(5 - 1 / 60);
        expect(afterMin, b.id).toBeLessThanOrEqual(15 + 1 / 60);
        expect(Math.abs(Date.parse(rec[3]!) - (b.start + lastElapsedS * 1000))).toBeLessThanOrEqual(500);
      }
      if (sb.group !== 'good') {
        expect(truth.faults[0].type).toBe(sb.group);
        expect(truth.faults[0].onsetElapsedS).toBeGreaterThanOrEqual(0);
      }
    }
    expect(reached).toBeGreaterThanOrEqual(7);
    const slow = set.test.find((sb) => sb.group === 'slow-drying')!;
    const dropout = set.test.find((sb) => sb.group === 'dropout')!;
    expect(dropout.batch.truth.dropped.length).toBeGreaterThan(0);
    const csvRows = readFileSync(join(dir, 'test', `${dropout.batch.id}.csv`), 'utf8').trimEnd().split('\n').length - 1;
    expect(csvRows).toBe(dropout.batch.spectra.length - dropout.batch.truth.dropped.length);
    // Slow drying takes longer than every reference batch.
    const refEnd = Math.max(...set.reference.map((sb) => sb.batch.truth.endpointT! - sb.batch.start));
    expect(slow.batch.truth.endpointT === null || slow.batch.truth.endpointT - slow.batch.start > refEnd).toBe(true);
  });

  it("Tideline's CSV importer reads the files: one batch each, elapsed times, the moisture column sparse (empty = no value)", () => {
    const sb = set.reference[0]!;
    const text = readFileSync(join(tmp, 'a', 'reference', `${sb.batch.id}.csv`), 'utf8');
    const [b] = readBatchCsv(text, { file: `${sb.batch.id}.csv`, origin: sb.batch.start });
    expect(b!.id).toBe(sb.batch.id);
    expect(b!.times).toEqual(sb.batch.times);
    expect(b!.spectra).toHaveLength(sb.batch.spectra.length);
    expect(Array.from(b!.spectra[10]!)).toEqual(Array.from(sb.batch.spectra[10]!));
    const props = Object.values(b!.properties);
    expect(props).toHaveLength(1);
    const have = props[0]!.flatMap((v, i) => (Number.isNaN(v) ? [] : [i]));
    expect(have).toEqual(sb.lab.map((l) => l.spectrumIndex));
  });

  it('the instrument has its own line shape (triangular slit, 10 nm FWHM), wavelength error, stray light and noise', () => {
    const inst = new SiteInstrument(siteAxis());
    const r = inst.renderAxis;
    const rng = new Rng(1);
    // A weak, narrow line (Gaussian, sd 0.5 nm) at 1600 nm: the instrument shows the slit function.
    const line = r.map((l) => 0.002 * Math.exp(-0.5 * ((l - 1600) / 0.5) ** 2));
    const got = inst.measure(line, rng, false);
    const axis = inst.axis;
    let k = 0;
    for (let j = 1; j < got.length; j++) if (got[j]! > got[k]!) k = j;
    // Interpolated half-height crossings.
    const half = got[k]! / 2;
    let a = k;
    while (got[a]! > half) a--;
    let b = k;
    while (got[b]! > half) b++;
    const left = axis[a]! + ((half - got[a]!) / (got[a + 1]! - got[a]!)) * (axis[a + 1]! - axis[a]!);
    const right = axis[b - 1]! + ((half - got[b - 1]!) / (got[b]! - got[b - 1]!)) * (axis[b]! - axis[b - 1]!);
    // Triangle (FWHM 10 nm) convolved with the 1.18 nm-FWHM line, sampled every 2.5 nm: about 10 nm.
    expect(right - left).toBeGreaterThan(9);
    expect(right - left).toBeLessThan(11.5);
    // Reported at λ but looking at λ + shift: the line appears at 1600 − shift.
    const x = (2 * (1600 - axis[0]!)) / (axis[axis.length - 1]! - axis[0]!) - 1;
    const shift = SITE_INSTRUMENT.wavelengthError.a + SITE_INSTRUMENT.wavelengthError.b * x * x;
    const centre = (left + right) / 2;
    expect(centre).toBeCloseTo(1600 - shift, 0);
    // Stray light: a flat 3 AU reads −log10((10^−3 + s)/(1 + s)).
    const flat = inst.measure(r.map(() => 3), rng, false);
    const s = SITE_INSTRUMENT.strayLight;
    expect(flat[200]).toBeCloseTo(-Math.log10((1e-3 + s) / (1 + s)), 5);
    // Noise rises towards the long-wavelength end: two measurements of the same spectrum differ more there.
    const base = r.map(() => 0.4);
    const diffs: number[][] = [[], []];
    for (let rep = 0; rep < 40; rep++) {
      const u = inst.measure(base, rng);
      const v = inst.measure(base, rng);
      // Second differences remove the per-scan offset and the slow wiggle.
      for (let j = 1; j < u.length - 1; j++) {
        const d = u[j + 1]! - 2 * u[j]! + u[j - 1]! - (v[j + 1]! - 2 * v[j]! + v[j - 1]!);
        if (j > 150 && j < 250) diffs[0]!.push(d);
        if (j > 380) diffs[1]!.push(d);
      }
    }
    const sd = (v: number[]) => Math.sqrt(v.reduce((t, d) => t + d * d, 0) / v.length);
    expect(sd(diffs[1]!) / sd(diffs[0]!)).toBeGreaterThan(3);
  });

  it('npm run sim -- site writes the set; options of other commands are refused', () => {
    const out = join(tmp, 'cli');
    const run = (args: string[]) => spawnSync(process.execPath, ['--import', 'tsx', 'simulators/cli.ts', ...args], { encoding: 'utf8' });
    const r = run(['site', '--out', out, '--seed', '9', '--reference', '2', '--good', '1', '--per-fault', '0']);
    expect(r.stderr).toBe('');
    expect(r.status).toBe(0);
    expect(r.stdout).toMatch(/FB25-101 \(reference, good\): \d+ spectra, endpoint at [\d.]+ min, stopped [\d.]+ min later, \d+ lab values/);
    expect(r.stdout).toMatch(/wrote 2 reference and 1 test batch files, 3 truth files/);
    expect(readdirSync(join(out, 'reference'))).toEqual(['FB25-101.csv', 'FB25-102.csv']);
    const bad = run(['site', '--out', out, '--fault', 'spikes@10']);
    expect(bad.status).toBe(2);
    expect(bad.stderr).toMatch(/--fault does not apply to "site"/);
    const bad2 = run(['dryer', '--out', out, '--reference', '3']);
    expect(bad2.status).toBe(2);
    expect(bad2.stderr).toMatch(/--reference applies to "site" only/);
  }, 60_000);
});
