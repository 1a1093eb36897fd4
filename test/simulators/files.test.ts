import { spawn } from 'node:child_process';
import { mkdtempSync, readdirSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { simulateReferenceSet } from '../../simulators/batch.ts';
import { formatValue, writeBatchFiles } from '../../simulators/files.ts';

const tmp = mkdtempSync(join(tmpdir(), 'tideline-sim-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));

function readAll(dir: string): Record<string, Buffer> {
  return Object.fromEntries(readdirSync(dir).sort().map((f) => [f, readFileSync(join(dir, f))]));
}

describe('file output', () => {
  it('the same seed gives byte-identical files; another seed does not', () => {
    const faults = { 1: [{ type: 'spikes' as const, onsetS: 600 }, { type: 'dropout' as const, onsetS: 1200 }] };
    writeBatchFiles(join(tmp, 'a'), simulateReferenceSet('dryer', 3, 7, { faults }));
    writeBatchFiles(join(tmp, 'b'), simulateReferenceSet('dryer', 3, 7, { faults }));
    writeBatchFiles(join(tmp, 'c'), simulateReferenceSet('dryer', 3, 8, { faults }));
    const a = readAll(join(tmp, 'a'));
    const b = readAll(join(tmp, 'b'));
    expect(Object.keys(a)).toEqual(['dryer-s7-b01.truth.json', 'dryer-s7-b02.truth.json', 'dryer-s7-b03.truth.json', 'dryer-spectra.csv', 'dryer-spectra.manifest.json']);
    for (const f of Object.keys(a)) expect(a[f]!.equals(b[f]!), f).toBe(true);
    const c = readAll(join(tmp, 'c'));
    expect(c['dryer-spectra.csv']!.equals(a['dryer-spectra.csv']!)).toBe(false);
  });

  it('CSV: first row the wavelengths, then one row per transmitted spectrum with batch and time; truth JSON per batch', () => {
    const set = simulateReferenceSet('reactor', 2, 5, { faults: { 0: [{ type: 'dropout', onsetS: 1800, params: { durationS: 400 } }] } });
    const w = writeBatchFiles(join(tmp, 'r'), set);
    const lines = readFileSync(w.csv, 'utf8').trimEnd().split('\n');
    const header = lines[0]!.split(',');
    expect(header.slice(0, 4)).toEqual(['batch', 'index', 't_ms', 'elapsed_s']);
    expect(header.slice(4).map(Number)).toEqual(set[0]!.axis);
    expect(set[0]!.truth.dropped).toHaveLength(20);
    expect(lines.length - 1).toBe(set[0]!.spectra.length - 20 + set[1]!.spectra.length);
    const row = lines[1]!.split(',');
    expect(row[0]).toBe(set[0]!.id);
    expect(Number(row[2])).toBe(set[0]!.times[0]);
    expect(Number(row[5])).toBeCloseTo(set[0]!.spectra[0]![1]!, 6);
    const indices = lines.slice(1).filter((l) => l.startsWith(set[0]!.id + ',')).map((l) => Number(l.split(',')[1]));
    for (const d of set[0]!.truth.dropped) expect(indices).not.toContain(d);
    const truth = JSON.parse(readFileSync(w.truth[0]!, 'utf8'));
    expect(truth.format).toBe('tideline-sim-truth');
    expect(truth.truth.property.values).toHaveLength(set[0]!.spectra.length);
    expect(truth.truth.endpointIndex).toBe(set[0]!.truth.endpointIndex);
    expect(truth.truth.faults[0].type).toBe('dropout');
    expect(truth.times).toEqual(set[0]!.times);
  });

  it('formats values with 7 significant digits', () => {
    expect(formatValue(0.123456789)).toBe('0.1234568');
    expect(formatValue(-1.5)).toBe('-1.5');
    expect(formatValue(Math.fround(0.1))).toBe('0.1');
  });
});

describe('command line', () => {
  const cli = (args: string[]) =>
    new Promise<{ status: number | null; stdout: string; stderr: string }>((resolve) => {
      const child = spawn(process.execPath, ['--import', 'tsx', 'simulators/cli.ts', ...args], { cwd: join(import.meta.dirname, '../..') });
      let stdout = '';
      let stderr = '';
      child.stdout.on('data', (d) => (stdout += d));
      child.stderr.on('data', (d) => (stderr += d));
      child.on('close', (status) => resolve({ status, stdout, stderr }));
    });

  it('writes byte-identical files for the same seed', async () => {
    const args = (dir: string) => ['reactor', '--batches', '2', '--seed', '7', '--interval', '60', '--out', join(tmp, dir), '--fault', 'stalled-reaction@60:rateFactor=0.2', '--faulty-batches', '2'];
    const [r1, r2] = await Promise.all([cli(args('cli1')), cli([...args('cli2'), '--quiet'])]);
    expect(r1.status, r1.stderr).toBe(0);
    expect(r2.status, r2.stderr).toBe(0);
    expect(r1.stdout).toMatch(/reactor-s7-b02: \d+ spectra, endpoint not reached, faults stalled-reaction@61\.0min/);
    const a = readAll(join(tmp, 'cli1'));
    const b = readAll(join(tmp, 'cli2'));
    expect(Object.keys(a)).toHaveLength(4);
    for (const f of Object.keys(a)) expect(a[f]!.equals(b[f]!), f).toBe(true);
  }, 300_000);

  it('--help explains every option; bad options get a clear message and exit code 2', async () => {
    const [h, bad, noUrl, unknown] = await Promise.all([
      cli(['--help']),
      cli(['dryer', '--out', join(tmp, 'x'), '--fault', 'stalled-reaction@3']),
      cli(['stream', 'dryer', '--token', 't']),
      cli(['mixer']),
    ]);
    expect(h.status).toBe(0);
    for (const opt of ['--seed', '--batches', '--fault', '--faulty-batches', '--interval', '--axis', '--unit', '--product', '--out', '--url', '--token', '--tokens-file', '--analyzer', '--analyzers', '--speed', '--json', '--window', '--boot', '--quiet']) {
      expect(h.stdout).toContain(opt);
    }
    expect(bad.status).toBe(2);
    expect(bad.stderr).toMatch(/not to the dryer/);
    expect(noUrl.status).toBe(2);
    expect(noUrl.stderr).toMatch(/--url is required/);
    expect(unknown.stderr).toMatch(/unknown command "mixer"/);
  }, 300_000);
});
