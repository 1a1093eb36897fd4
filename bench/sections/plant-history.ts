/**
 * Plant-history PCA (server/models/history-pca.ts): batches × spectra × points of invented NIR-like
 * spectra (core-pca.ts syntheticSpectra, one seed per batch) stored in a fresh SQLite database
 * through the storage interface, then
 * - build_500_batches_s: the streamed build — worker threads (one per core) read the spectra from
 *   the database into per-group scatter states, merge, decompose (10 components), and
 *   cross-validate by 7 groups of batches (PRESS for 1…12 components, second streamed pass). Run in
 *   a child process so that
 * - build_peak_rss_mb: that process's peak resident memory (process.resourceUsage().maxRSS, all
 *   threads) is the build's alone;
 * - build_cv_share: the cross-validation's share of the build's wall time;
 * - pca_fit_vs_numpy_eigh: the build's first pass and decomposition (worker start included, the
 *   cross-validation left out) / numpy on the same database in the same run (sqlite3 read in chunks of 4,096 spectra, X_cᵀX_c accumulated by BLAS about the first
 *   spectrum, numpy.linalg.eigh), with numpy's own peak memory beside it.
 * Size: `--history-size 500x500x1024` (the default; `--quick`: 40x100x256). The full size writes about
 * 1 GB to a temporary folder.
 */
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { availableParallelism, loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { syntheticSpectra } from './core-pca.ts';
import { SqliteStorage } from '../../server/storage/sqlite-storage.ts';
import { emptyIngestWrite } from '../../server/storage/storage.ts';

export const name = 'plant-history';

const NUMPY_SCRIPT = `
import sys, json, time, sqlite3, resource, numpy as np
path, n_batches, p, A = sys.argv[1], int(sys.argv[2]), int(sys.argv[3]), int(sys.argv[4])
t = time.perf_counter()
db = sqlite3.connect('file:' + path + '?mode=ro', uri=True)
cur = db.execute('SELECT vals FROM spectra ORDER BY batch, idx')
S = np.zeros((p, p)); s = np.zeros(p); n = 0; c = None
while True:
    rows = cur.fetchmany(4096)
    if not rows:
        break
    X = np.frombuffer(b''.join(r[0] for r in rows), dtype='<f4').reshape(len(rows), p).astype(np.float64)
    if c is None:
        c = X[0].copy()
    X -= c
    S += X.T @ X; s += X.sum(axis=0); n += len(rows)
d = s / n
C = (S - n * np.outer(d, d)) / (n - 1)
w, V = np.linalg.eigh(C)
secs = time.perf_counter() - t
print(json.dumps({'seconds': secs, 'n': n, 'lam': w[::-1][:A].tolist(), 'rss_mb': resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}))
`;

export function parseHistorySize(text: string): { batches: number; spectra: number; points: number } {
  const m = /^(\d+)x(\d+)x(\d+)$/.exec(text);
  if (!m) throw new Error(`--history-size "${text}" must be BATCHESxSPECTRAxPOINTS, e.g. 500x500x1024`);
  const [batches, spectra, points] = [Number(m[1]), Number(m[2]), Number(m[3])];
  if (batches < 8 || spectra < 2 || points < 16) throw new Error(`--history-size: at least 8 batches, 2 spectra, 16 points (got ${text})`);
  return { batches, spectra, points };
}

async function writeHistory(file: string, size: { batches: number; spectra: number; points: number }): Promise<string[]> {
  const st = new SqliteStorage({ file });
  try {
    await st.createUnit({ id: 'bench-unit', name: 'bench', kind: 'dryer', description: '', createdAt: 0 });
    await st.createAnalyzer({ id: 'bench-nir', name: 'bench', createdAt: 0 });
    const axis = Float64Array.from({ length: size.points }, (_, j) => 1000 + (700 * j) / (size.points - 1));
    const ids: string[] = [];
    for (let b = 0; b < size.batches; b++) {
      const id = `PH-${String(b).padStart(4, '0')}`;
      ids.push(id);
      const X = syntheticSpectra(size.spectra, size.points, 1000 + b);
      const w = emptyIngestWrite();
      const t0 = Date.UTC(2024, 0, 1) + b * 86_400_000;
      w.boots.push({ analyzer: 'bench-nir', boot: b + 1, lastSeq: size.spectra + 1, lastSeen: t0 });
      w.batchStarts.push({ id, unit: 'bench-unit', analyzer: 'bench-nir', boot: b + 1, product: 'bench', startSeq: 0, startT: t0, axis, modelVersion: null, createdAt: t0 });
      for (let i = 0; i < size.spectra; i++) {
        w.spectra.push({ batch: id, idx: i, seq: i + 1, t: t0 + 60_000 * (i + 1), values: Float32Array.from(X.data.subarray(i * size.points, (i + 1) * size.points)), analyzer: 'bench-nir', boot: b + 1, receivedAt: t0 });
      }
      w.batchProgress.push({ batch: id, spectrumCount: size.spectra, lastSeq: size.spectra, lastT: t0 + 60_000 * size.spectra, endpointState: null, endpointAt: null });
      w.batchEnds.push({ batch: id, endSeq: size.spectra + 1, endT: t0 + 60_000 * (size.spectra + 1), endReason: 'bench' });
      await st.commitIngest(w);
    }
    return ids;
  } finally {
    await st.close();
  }
}

/** Child process: one build, then its figures and peak memory as JSON on stdout. */
async function child(file: string, batches: number, withCv: boolean): Promise<void> {
  const { historyPca } = await import('../../server/models/history-pca.ts');
  const ids = Array.from({ length: batches }, (_, b) => `PH-${String(b).padStart(4, '0')}`);
  const t = performance.now();
  const h = await historyPca({ source: { kind: 'sqlite', file }, batches: ids, components: 10, groups: withCv ? 7 : 0, maxComponents: 12 });
  const wall = (performance.now() - t) / 1000;
  process.stdout.write(JSON.stringify({ wall, seconds: h.seconds, workers: h.workers, spectra: h.spectra, lam: Array.from(h.model.eigenvalues), rss_mb: process.resourceUsage().maxRSS / 1024 }));
}

function runChild(file: string, batches: number, withCv: boolean): { wall: number; seconds: { scatter: number; decomposition: number; crossValidation: number }; workers: number; spectra: number; lam: number[]; rss_mb: number } {
  const r = spawnSync(process.execPath, ['--import', 'tsx', fileURLToPath(import.meta.url), '--child', file, String(batches), withCv ? 'cv' : 'no-cv'], { encoding: 'utf8', maxBuffer: 16 * 1024 * 1024 });
  if (r.status !== 0) throw new Error(`plant-history build failed: ${r.stderr}`);
  return JSON.parse(r.stdout);
}

export async function run(ctx: { quick: boolean; log(line: string): void; historySize?: string }): Promise<Record<string, number | string>> {
  const size = parseHistorySize(ctx.historySize ?? (ctx.quick ? '40x100x256' : '500x500x1024'));
  const label = `${size.batches} batches × ${size.spectra} spectra × ${size.points} points`;
  const dir = mkdtempSync(join(tmpdir(), 'tideline-bench-history-'));
  try {
    const file = join(dir, 'tideline.db');
    let t = performance.now();
    await writeHistory(file, size);
    ctx.log(`${label} written to SQLite in ${((performance.now() - t) / 1000).toFixed(1)} s; load average ${loadavg().map((v) => v.toFixed(1)).join(' ')} on ${availableParallelism()} cores`);
    const full = runChild(file, size.batches, true);
    ctx.log(`streamed build with cross-validation: ${full.wall.toFixed(2)} s wall on ${full.workers} workers (pass one ${full.seconds.scatter.toFixed(2)} s, decomposition ${full.seconds.decomposition.toFixed(2)} s, cross-validation ${full.seconds.crossValidation.toFixed(2)} s), peak RSS ${full.rss_mb.toFixed(0)} MB`);
    const pcaOnly = { wall: full.seconds.scatter + full.seconds.decomposition, lam: full.lam };
    const np = JSON.parse(execFileSync('python3', ['-c', NUMPY_SCRIPT, file, String(size.batches), String(size.points), '10'], { encoding: 'utf8' })) as { seconds: number; n: number; lam: number[]; rss_mb: number };
    ctx.log(`numpy (sqlite3 chunks, X_cᵀX_c by BLAS, eigh): ${np.seconds.toFixed(2)} s, peak RSS ${np.rss_mb.toFixed(0)} MB; streamed build without its cross-validation ${pcaOnly.wall.toFixed(2)} s`);
    let maxRel = 0;
    for (let a = 0; a < 10; a++) maxRel = Math.max(maxRel, Math.abs(pcaOnly.lam[a]! / np.lam[a]! - 1));
    ctx.log(`load average after: ${loadavg().map((v) => v.toFixed(1)).join(' ')}`);
    return {
      build_500_batches_s: full.wall,
      build_peak_rss_mb: full.rss_mb,
      build_cv_share: full.seconds.crossValidation / full.wall,
      pca_fit_vs_numpy_eigh: pcaOnly.wall / np.seconds,
      history_pca_s: pcaOnly.wall,
      history_numpy_eigh_s: np.seconds,
      history_numpy_peak_rss_mb: np.rss_mb,
      history_eigenvalue_max_rel_diff_vs_numpy: maxRel,
      history_workers: full.workers,
      history_size: label + (size.batches === 500 && size.spectra === 500 && size.points === 1024 ? '' : ' (not the documented 500 × 500 × 1,024)'),
    };
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

if (process.argv[2] === '--child') {
  child(process.argv[3]!, Number(process.argv[4]), process.argv[5] === 'cv').catch((e) => {
    process.stderr.write(String((e as Error).stack ?? e));
    process.exit(1);
  });
} else if (import.meta.url === `file://${process.argv[1]}`) {
  const i = process.argv.indexOf('--history-size');
  run({ quick: process.argv.includes('--quick'), log: (l) => console.log(l), ...(i > 0 ? { historySize: process.argv[i + 1]! } : {}) }).then((r) => console.log(r));
}
