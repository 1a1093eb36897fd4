/**
 * File output of simulated batches: one CSV of spectra for a set and one JSON ground-truth file per
 * batch, plus a manifest. Identical bytes for the same seed (no clock, fixed number formatting).
 *
 * CSV layout: first row `batch,index,t_ms,elapsed_s,<wavelength nm>…`; then one row per transmitted
 * spectrum (drop-outs are missing, as they would be from the analyzer). Values are absorbance with
 * 7 significant digits.
 */
import { closeSync, mkdirSync, openSync, writeFileSync, writeSync } from 'node:fs';
import { join } from 'node:path';
import type { SimulatedBatch } from './batch-types.ts';

export const TRUTH_FORMAT = 'tideline-sim-truth';
export const TRUTH_VERSION = 1;

/** Deterministic text for one value: 7 significant digits, shortest form. */
export function formatValue(v: number): string {
  return String(Number(v.toPrecision(7)));
}

export function csvHeader(axis: readonly number[]): string {
  return ['batch', 'index', 't_ms', 'elapsed_s', ...axis.map((a) => String(a))].join(',') + '\n';
}

/** CSV rows of one batch (without header), skipping dropped spectra. */
export function batchCsvRows(b: SimulatedBatch): string {
  const dropped = new Set(b.truth.dropped);
  const lines: string[] = [];
  for (let i = 0; i < b.spectra.length; i++) {
    if (dropped.has(i)) continue;
    const s = b.spectra[i]!;
    const parts = new Array<string>(s.length + 4);
    parts[0] = b.id;
    parts[1] = String(i);
    parts[2] = String(b.times[i]);
    parts[3] = String((b.times[i]! - b.start) / 1000);
    for (let j = 0; j < s.length; j++) parts[j + 4] = formatValue(s[j]!);
    lines.push(parts.join(','));
  }
  return lines.length ? lines.join('\n') + '\n' : '';
}

/** Ground truth of one batch as JSON text (2-space indent, fixed key order). */
export function truthJson(b: SimulatedBatch): string {
  return (
    JSON.stringify(
      {
        format: TRUTH_FORMAT,
        version: TRUTH_VERSION,
        id: b.id,
        kind: b.kind,
        unit: b.unit,
        product: b.product,
        seed: b.seed,
        start: b.start,
        axis: b.axis,
        times: b.times,
        truth: b.truth,
      },
      null,
      2,
    ) + '\n'
  );
}

export interface WrittenSet {
  csv: string;
  truth: string[];
  manifest: string;
}

/** Write a set of batches of one kind to `dir` (created if missing). Returns the file paths. */
export function writeBatchFiles(dir: string, batches: readonly SimulatedBatch[], name?: string): WrittenSet {
  if (batches.length === 0) throw new Error('no batches to write');
  const kind = batches[0]!.kind;
  const axis = batches[0]!.axis;
  for (const b of batches) {
    if (b.kind !== kind) throw new Error(`batch ${b.id} is a ${b.kind}; this set holds ${kind} batches`);
    if (b.axis.length !== axis.length || b.axis.some((v, i) => v !== axis[i])) throw new Error(`batch ${b.id} has a different wavelength axis from ${batches[0]!.id}`);
  }
  mkdirSync(dir, { recursive: true });
  const base = name ?? `${kind}-spectra`;
  const csv = join(dir, `${base}.csv`);
  const fd = openSync(csv, 'w');
  try {
    writeSync(fd, csvHeader(axis));
    for (const b of batches) writeSync(fd, batchCsvRows(b));
  } finally {
    closeSync(fd);
  }
  const truth: string[] = [];
  for (const b of batches) {
    const p = join(dir, `${b.id}.truth.json`);
    writeFileSync(p, truthJson(b));
    truth.push(p);
  }
  const manifest = join(dir, `${base}.manifest.json`);
  writeFileSync(
    manifest,
    JSON.stringify(
      {
        format: 'tideline-sim-set',
        version: 1,
        kind,
        spectra: `${base}.csv`,
        batches: batches.map((b) => ({
          id: b.id,
          seed: b.seed,
          truth: `${b.id}.truth.json`,
          spectra: b.spectra.length - b.truth.dropped.length,
          endpointIndex: b.truth.endpointIndex,
          faults: b.truth.faults.map((f) => f.type),
        })),
      },
      null,
      2,
    ) + '\n',
  );
  return { csv, truth, manifest };
}
