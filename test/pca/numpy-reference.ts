/**
 * Runs numpy.linalg.svd (python3, numpy 2.4 on these machines) on a matrix passed as a raw
 * little-endian float64 file, and returns eigenvalues (n − 1), loadings, scores, T², Q and θ of the
 * discarded part, computed the textbook way from the full SVD. Used by the PCA tests only.
 */
import { execFileSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { DenseMatrix } from '../../core/linalg/dense-matrix.ts';

const SCRIPT = `
import sys, json, numpy as np
out = []
for spec in sys.argv[1:]:
  path, n, p, A, center = spec.split(',')
  n, p, A, center = int(n), int(p), int(A), center == '1'
  out.append(one(path, n, p, A, center))
print(json.dumps(out))
`;

const ONE = `
import json, numpy as np
def one(path, n, p, A, center):
  X = np.fromfile(path + '/x.bin', dtype='<f8').reshape(n, p)
  mean = X.mean(axis=0) if center else np.zeros(p)
  Xc = X - mean
  U, s, Vt = np.linalg.svd(Xc, full_matrices=False)
  lam_all = s**2 / (n - 1)
  P = Vt[:A].T.copy()
  T = Xc @ P
  lam = lam_all[:A]
  t2 = ((T**2) / lam).sum(axis=1)
  E = Xc - T @ P.T
  q = (E**2).sum(axis=1)
  rest = lam_all[A:]
  theta = [float(rest.sum()), float((rest**2).sum()), float((rest**3).sum())]
  np.asarray(P, dtype='<f8').tofile(path + '/P.bin')
  np.asarray(T, dtype='<f8').tofile(path + '/T.bin')
  np.asarray(t2, dtype='<f8').tofile(path + '/t2.bin')
  np.asarray(q, dtype='<f8').tofile(path + '/q.bin')
  np.asarray(lam, dtype='<f8').tofile(path + '/lam.bin')
  return {'theta': theta, 'total': float(lam_all.sum()), 'numpy': np.__version__}

`;

export interface NumpyPca {
  loadings: Float64Array; // p × A
  scores: Float64Array; // n × A
  t2: Float64Array;
  q: Float64Array;
  eigenvalues: Float64Array;
  theta: [number, number, number];
  total: number;
  numpy: string;
}

function readF64(file: string): Float64Array {
  const b = readFileSync(file);
  return new Float64Array(b.buffer.slice(b.byteOffset, b.byteOffset + b.byteLength));
}

export function numpyPca(X: DenseMatrix, A: number, center: boolean): NumpyPca {
  return numpyPcaMany([{ X, A, center }])[0]!;
}

/** Several cases in one python3 process (numpy's import is the slow part). */
export function numpyPcaMany(cases: { X: DenseMatrix; A: number; center: boolean }[]): NumpyPca[] {
  const root = mkdtempSync(join(tmpdir(), 'tideline-pca-'));
  try {
    const specs = cases.map(({ X, A, center }, i) => {
      const dir = join(root, String(i));
      mkdirSync(dir);
      writeFileSync(join(dir, 'x.bin'), new Uint8Array(X.data.buffer, X.data.byteOffset, X.data.byteLength));
      return [dir, X.rows, X.cols, A, center ? 1 : 0].join(',');
    });
    // One BLAS thread: on a shared two-core machine OpenBLAS threads spin against the test runner.
    const env = { ...process.env, OPENBLAS_NUM_THREADS: '1' };
    const out = execFileSync('python3', ['-c', ONE + SCRIPT, ...specs], { encoding: 'utf8', maxBuffer: 1 << 24, env });
    const metas = JSON.parse(out) as { theta: [number, number, number]; total: number; numpy: string }[];
    return metas.map((meta, i) => {
      const dir = join(root, String(i));
      return {
        loadings: readF64(join(dir, 'P.bin')),
        scores: readF64(join(dir, 'T.bin')),
        t2: readF64(join(dir, 't2.bin')),
        q: readF64(join(dir, 'q.bin')),
        eigenvalues: readF64(join(dir, 'lam.bin')),
        theta: meta.theta,
        total: meta.total,
        numpy: meta.numpy,
      };
    });
  } finally {
    rmSync(root, { recursive: true, force: true });
  }
}
