/**
 * A plant-history PCA streamed from the database by worker threads (server/models/history-pca.ts):
 * batches imported as CSV files like a site's (server/transfer/import-batches.ts), then streamed by
 * two workers into per-group scatter states, merged, decomposed, and cross-validated by groups of
 * batches in a second pass — against numpy on the whole matrix of the stored values
 * (scripts/fixtures/streaming-pca-numpy.py: numpy.cov + numpy.linalg.eigh, leave-one-group-out
 * row-wise PRESS). Tolerances: eigenvalues and θ 1e-9 relative, loadings 1e-7, PRESS 1e-8 relative.
 */
import { execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, describe, expect, it } from 'vitest';
import { syntheticSpectra } from '../../bench/sections/core-pca.ts';
import { writeBatchCsv } from '../../core/io/batch-csv.ts';
import { SqliteStorage } from '../../server/storage/sqlite-storage.ts';
import { importBatches } from '../../server/transfer/import-batches.ts';
import { historyPca, type HistoryProgress } from '../../server/models/history-pca.ts';

const SCRIPT = fileURLToPath(new URL('../../scripts/fixtures/streaming-pca-numpy.py', import.meta.url));
const dir = mkdtempSync(join(tmpdir(), 'tideline-history-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('plant-history PCA from storage', () => {
  it('two workers, four groups: eigenpairs, θ and PRESS as numpy gives them on the whole matrix', async () => {
    const nb = 12;
    const per = 80;
    const p = 96;
    const X = syntheticSpectra(nb * per, p, 5);
    const axis = Float64Array.from({ length: p }, (_, j) => 1000 + 5 * j);
    const file = join(dir, 'tideline.db');
    const storage = new SqliteStorage({ file });
    await storage.createUnit({ id: 'fbd-1', name: 'fbd-1', kind: 'dryer', description: '', createdAt: 0 });
    const ids = Array.from({ length: nb }, (_, b) => `H-${String(b).padStart(3, '0')}`);
    const files = ids.map((id, b) => ({
      name: `${id}.csv`,
      content: writeBatchCsv([{ id, axis, times: Array.from({ length: per }, (_, i) => Date.UTC(2026, 0, 1 + b) + 60_000 * i), spectra: Array.from({ length: per }, (_, i) => Float32Array.from(X.data.subarray((b * per + i) * p, (b * per + i + 1) * p))), properties: {} }]),
    }));
    await importBatches(storage, { files, unit: 'fbd-1', product: 'P', user: 'test' }, Date.UTC(2026, 1, 1));
    // The stored values (Float32) are what numpy must see.
    const stored = new Float64Array(nb * per * p);
    let r = 0;
    for (const id of ids) for await (const s of storage.iterateSpectra(id)) stored.set(s.values, p * r++);
    await storage.close();
    expect(r).toBe(nb * per);

    const G = 4;
    const A = 4;
    const maxA = 6;
    const seen: HistoryProgress[] = [];
    const h = await historyPca({ source: { kind: 'sqlite', file }, batches: ids, components: A, groups: G, maxComponents: maxA, workers: 2, onProgress: (q) => seen.push(q) });
    expect(h).toMatchObject({ spectra: nb * per, variables: p, workers: 2 });
    const last = (pass: string) => seen.filter((q) => q.pass === pass).at(-1);
    expect(last('scatter')).toEqual({ pass: 'scatter', batches: nb, of: nb, spectra: nb * per });
    expect(last('cross-validation')).toEqual({ pass: 'cross-validation', batches: nb, of: nb, spectra: nb * per });

    const groupOf = ids.flatMap((_, b) => new Array<number>(per).fill(b % G));
    const bin = join(dir, 'x.bin');
    writeFileSync(bin, new Uint8Array(stored.buffer));
    const ref = JSON.parse(execFileSync('python3', [SCRIPT, bin, String(nb * per), String(p), String(A), String(maxA), JSON.stringify(groupOf)], { encoding: 'utf8', maxBuffer: 64 * 1024 * 1024 })) as {
      eigenvalues: number[]; loadings: number[][]; theta: number[]; press: number[];
    };
    for (let a = 0; a < A; a++) expect(Math.abs(h.model.eigenvalues[a]! / ref.eigenvalues[a]! - 1)).toBeLessThan(1e-9);
    for (let k = 0; k < 3; k++) expect(Math.abs(h.model.theta[k]! / ref.theta[k]! - 1)).toBeLessThan(1e-9);
    let d = 0;
    for (let j = 0; j < p; j++) for (let a = 0; a < A; a++) d = Math.max(d, Math.abs(h.model.loadings[j * A + a]! - ref.loadings[j]![a]!));
    expect(d).toBeLessThan(1e-7);
    for (let a = 0; a < maxA; a++) expect(Math.abs(h.press![a]! / ref.press[a]! - 1)).toBeLessThan(1e-8);
  }, 120_000);

  it('stops its workers when aborted (the server closing)', async () => {
    const ids = Array.from({ length: 12 }, (_, b) => `H-${String(b).padStart(3, '0')}`);
    const abort = new AbortController();
    const run = historyPca({ source: { kind: 'sqlite', file: join(dir, 'tideline.db') }, batches: ids, components: 2, workers: 2, signal: abort.signal, onProgress: () => abort.abort() });
    await expect(run).rejects.toThrow(/stopped|exit code/);
  }, 120_000);

  it('names what it cannot do', async () => {
    await expect(historyPca({ source: { kind: 'sqlite', file: join(dir, 'tideline.db') }, batches: ['H-000'], components: 2 })).rejects.toThrow(/at least 2 batches/);
    await expect(historyPca({ source: { kind: 'sqlite', file: join(dir, 'tideline.db') }, batches: ['NOPE', 'H-000'], components: 2, groups: 2 })).rejects.toThrow(/"NOPE" has no stored spectra/);
  });
});

describe('plant-history decomposition through REST', () => {
  it('starts a job, shows its progress, and gives the eigenvalues of the stored spectra', async () => {
    const { login, startTestServer } = await import('../server/helpers.ts');
    const { fitPca } = await import('../../core/pca/fit-pca.ts');
    const { matrixFromRows } = await import('../../core/linalg/dense-matrix.ts');
    const ts = await startTestServer({}, { units: ['fbd-1'] });
    try {
      const owner = await login(ts, 'model-owner');
      const p = 64;
      const per = 40;
      const axis = Float64Array.from({ length: p }, (_, j) => 1100 + 4 * j);
      const ids = Array.from({ length: 9 }, (_, b) => `R-${b}`);
      const X = syntheticSpectra(ids.length * per, p, 9);
      const files = ids.map((id, b) => ({
        name: `${id}.csv`,
        content: writeBatchCsv([{ id, axis, times: Array.from({ length: per }, (_, i) => Date.UTC(2026, 2, 1 + b) + 30_000 * i), spectra: Array.from({ length: per }, (_, i) => Float32Array.from(X.data.subarray((b * per + i) * p, (b * per + i + 1) * p))), properties: {} }]),
      }));
      expect((await owner.post('/api/import', { unit: 'fbd-1', product: 'P', files })).status).toBe(201);
      const bad = await owner.post('/api/models/history-pca', { referenceBatches: ['R-0', 'NOPE'], components: 3 });
      expect(bad.status).toBe(404);
      expect(bad.body.detail).toContain('"NOPE"');
      const r = await owner.post('/api/models/history-pca', { referenceBatches: ids, components: 3, groups: 3, chain: [{ step: 'snv' }] });
      expect(r.status, JSON.stringify(r.body)).toBe(202);
      expect(r.body).toMatchObject({ status: 'running', batches: 9, components: 3, groups: 3 });
      let j = r.body;
      const seen = new Set<string>();
      for (let k = 0; k < 600 && j.status === 'running'; k++) {
        await new Promise((res) => setTimeout(res, 200));
        j = (await owner.get(`/api/models/history-pca/${j.job}`)).body;
        if (j.progress) seen.add(`${j.progress.pass}:${j.progress.batches}`);
      }
      expect(j.status, j.error).toBe('done');
      expect(j.progress).toEqual({ pass: 'cross-validation', batches: 9, of: 9, spectra: 9 * per });
      expect(j.result).toMatchObject({ spectra: 9 * per, variables: p, leastPress: expect.any(Number) });
      expect(j.result.chain).toMatch(/^snv, learned state fitted on \d+ spectra/);
      // The same spectra through SNV, in memory: the same eigenvalues.
      const rows: Float64Array[] = [];
      for (const id of ids) {
        const s = (await owner.get(`/api/batches/${id}/spectra?limit=1000`)).body as { items: { values: number[] }[] };
        for (const it of s.items) {
          const v = Float64Array.from(it.values);
          const m = v.reduce((a, b) => a + b, 0) / p;
          const sd = Math.sqrt(v.reduce((a, b) => a + (b - m) ** 2, 0) / (p - 1));
          rows.push(v.map((x) => (x - m) / sd));
        }
      }
      const full = fitPca(matrixFromRows(rows), { components: 3 });
      for (let a = 0; a < 3; a++) expect(Math.abs(j.result.eigenvalues[a] / full.eigenvalues[a]! - 1)).toBeLessThan(1e-6);
    } finally {
      await ts.stop();
    }
  }, 180_000);
});
