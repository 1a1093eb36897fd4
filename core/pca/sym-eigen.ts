/**
 * Largest eigenpairs of a dense symmetric d × d matrix (the p × p or n × n Gram matrix of a PCA fit).
 *
 * Lanczos iteration with full reorthogonalization (classical Gram–Schmidt applied twice, "twice is
 * enough": Giraud, Langou & Rozložník 2005), Ritz pairs from the tridiagonal matrix, stopped when the
 * Ritz residual estimate β_m|s_m,i| ≤ tol·θ_max for each wanted pair (Parlett, The Symmetric
 * Eigenvalue Problem, 1980/1998, ch. 13). Small matrices go to a full symmetric decomposition
 * (ml-matrix, tred2 + tql2). Start vector from a seeded PRNG: the result is deterministic.
 */
import { EigenvalueDecomposition, Matrix } from 'ml-matrix';
import { createPrng } from '../stats/prng.ts';

export interface SymEigen {
  /** Largest first, length k. */
  values: Float64Array;
  /** d × k row-major: column i is the unit eigenvector of values[i]. */
  vectors: Float64Array;
  /** Lanczos steps taken (0 for the full decomposition). */
  steps: number;
}

const FULL_DECOMPOSITION_BELOW = 160;

export function topSymmetricEigen(G: Float64Array, d: number, k: number, seed = 1, tol = 1e-14): SymEigen {
  if (!Number.isInteger(k) || k < 1 || k > d) throw new RangeError(`asked for ${k} eigenpairs of a ${d} × ${d} matrix`);
  if (d <= FULL_DECOMPOSITION_BELOW || k > d / 3) return fullEigen(G, d, k);
  const r = lanczosEigen((x, y) => symMatVec(G, d, x, y), d, k, seed, tol, frobenius(G));
  // Guards, each falling back to the full decomposition (never needed on the test data):
  // 1. the true residuals ‖Gv − λv‖ must be ≤ 1e-9·λ1;
  // 2. single-vector Lanczos sees one copy of a repeated eigenvalue: run it again on G deflated by
  //    the k pairs found, (I − VVᵀ)G(I − VVᵀ), from a fresh start; its largest eigenvalue must lie
  //    below λ_k, or an eigenvalue was missed.
  if (!trueResidualOk(G, d, k, r)) return fullEigen(G, d, k);
  if (k < d) {
    const V = r.vectors;
    const proj = new Float64Array(k);
    const deflate = (y: Float64Array): void => {
      proj.fill(0);
      for (let i = 0; i < d; i++) for (let c = 0; c < k; c++) proj[c] += V[i * k + c]! * y[i]!;
      for (let i = 0; i < d; i++) for (let c = 0; c < k; c++) y[i] -= V[i * k + c]! * proj[c]!;
    };
    const xd = new Float64Array(d);
    const rest = lanczosEigen(
      (x, y) => {
        xd.set(x);
        deflate(xd);
        symMatVec(G, d, xd, y);
        deflate(y);
      },
      d - k,
      1,
      seed + 7919,
      1e-10,
      frobenius(G),
      d,
    );
    if (rest.values[0]! > r.values[k - 1]! * (1 - 1e-9)) return fullEigen(G, d, k);
  }
  return r;
}

function frobenius(G: Float64Array): number {
  let f = 0;
  for (let i = 0; i < G.length; i++) f += G[i]! * G[i]!;
  return Math.sqrt(f);
}

function trueResidualOk(G: Float64Array, d: number, k: number, r: SymEigen): boolean {
  const v = new Float64Array(d);
  const gv = new Float64Array(d);
  const scale = Math.abs(r.values[0]!) || 1;
  for (let c = 0; c < k; c++) {
    for (let i = 0; i < d; i++) v[i] = r.vectors[i * k + c]!;
    symMatVec(G, d, v, gv);
    let s = 0;
    for (let i = 0; i < d; i++) s += (gv[i]! - r.values[c]! * v[i]!) ** 2;
    if (!(Math.sqrt(s) <= 1e-9 * scale)) return false;
  }
  return true;
}

function fullEigen(G: Float64Array, d: number, k: number): SymEigen {
  const rows: number[][] = [];
  for (let i = 0; i < d; i++) rows.push(Array.from(G.subarray(i * d, (i + 1) * d)));
  const evd = new EigenvalueDecomposition(new Matrix(rows), { assumeSymmetric: true });
  const vals = evd.realEigenvalues;
  const vecs = evd.eigenvectorMatrix;
  const order = vals.map((_, i) => i).sort((a, b) => vals[b]! - vals[a]!);
  const values = new Float64Array(k);
  const vectors = new Float64Array(d * k);
  for (let c = 0; c < k; c++) {
    const src = order[c]!;
    values[c] = vals[src]!;
    for (let i = 0; i < d; i++) vectors[i * k + c] = vecs.get(i, src);
  }
  return { values, vectors, steps: 0 };
}

function symMatVec(G: Float64Array, d: number, x: Float64Array, y: Float64Array): void {
  for (let i = 0; i < d; i++) {
    const off = i * d;
    let s0 = 0, s1 = 0, s2 = 0, s3 = 0;
    let j = 0;
    for (; j + 3 < d; j += 4) {
      s0 += G[off + j]! * x[j]!;
      s1 += G[off + j + 1]! * x[j + 1]!;
      s2 += G[off + j + 2]! * x[j + 2]!;
      s3 += G[off + j + 3]! * x[j + 3]!;
    }
    for (; j < d; j++) s0 += G[off + j]! * x[j]!;
    y[i] = s0 + s1 + s2 + s3;
  }
}

function dot(a: Float64Array, aOff: number, b: Float64Array, d: number): number {
  let s = 0;
  for (let i = 0; i < d; i++) s += a[aOff + i]! * b[i]!;
  return s;
}

/** Orthogonalize w against basis rows 0..m−1 (twice), returns nothing; w modified in place. */
function reorthogonalize(Q: Float64Array, m: number, d: number, w: Float64Array, coef: Float64Array): void {
  for (let pass = 0; pass < 2; pass++) {
    for (let i = 0; i < m; i++) coef[i] = dot(Q, i * d, w, d);
    for (let i = 0; i < m; i++) {
      const c = coef[i]!;
      const off = i * d;
      for (let t = 0; t < d; t++) w[t]! -= c * Q[off + t]!;
    }
  }
}

function randomUnit(d: number, rng: ReturnType<typeof createPrng>, out: Float64Array): void {
  let s = 0;
  for (let i = 0; i < d; i++) {
    const v = rng.normal();
    out[i] = v;
    s += v * v;
  }
  const inv = 1 / Math.sqrt(s);
  for (let i = 0; i < d; i++) out[i]! *= inv;
}

function norm(w: Float64Array): number {
  let s = 0;
  for (let i = 0; i < w.length; i++) s += w[i]! * w[i]!;
  return Math.sqrt(s);
}

/**
 * Lanczos on the operator `apply` (y = Op·x) of dimension d (its range), vectors of length `len`
 * (= d, or the full length when Op is a deflated matrix whose range has dimension d < len).
 */
function lanczosEigen(
  apply: (x: Float64Array, y: Float64Array) => void,
  rangeDim: number,
  k: number,
  seed: number,
  tol: number,
  fro: number,
  len = rangeDim,
): SymEigen {
  const d = len;
  const rng = createPrng(seed);
  let capacity = Math.min(rangeDim, Math.max(4 * k + 40, 100));
  let Q = new Float64Array(capacity * d);
  const alpha: number[] = [];
  const beta: number[] = [];
  const w = new Float64Array(d);
  const coef = new Float64Array(d);
  // Scale for "β is zero": the Frobenius norm bounds ‖G‖.
  if (fro === 0) return { values: new Float64Array(k), vectors: identityColumns(d, k), steps: 0 };
  const q0 = new Float64Array(d);
  randomUnit(d, rng, q0);
  if (rangeDim < d) {
    // deflated operator: start inside its range
    apply(q0, w);
    const nw = norm(w);
    for (let t = 0; t < d; t++) q0[t] = w[t]! / nw;
  }
  Q.set(q0, 0);
  let m = 1; // basis size
  for (;;) {
    const j = m - 1;
    const qj = Q.subarray(j * d, (j + 1) * d);
    apply(qj, w);
    const a = dot(Q, j * d, w, d);
    alpha.push(a);
    reorthogonalize(Q, m, d, w, coef);
    let b = norm(w);
    const breakdown = b <= 1e-13 * fro;
    const exhausted = m === rangeDim;
    const check = exhausted || (m >= k + 2 && (m % 4 === 0 || breakdown));
    if (check && !breakdown) {
      const done = ritzConverged(alpha, beta, b, k, tol);
      if (done || exhausted) return ritzPairs(alpha, beta, Q, m, d, k, m);
    }
    if (exhausted) return ritzPairs(alpha, beta, Q, m, d, k, m);
    if (breakdown) {
      // Invariant subspace found: continue from a fresh random direction orthogonal to the basis.
      b = 0;
      for (let attempt = 0; ; attempt++) {
        randomUnit(d, rng, w);
        if (rangeDim < d) {
          const tmp = Float64Array.from(w);
          apply(tmp, w);
        }
        reorthogonalize(Q, m, d, w, coef);
        const nw = norm(w);
        if (nw > 1e-8) { for (let t = 0; t < d; t++) w[t]! /= nw; break; }
        if (attempt > 10) return ritzPairs(alpha, beta, Q, m, d, k, m);
      }
    } else {
      for (let t = 0; t < d; t++) w[t]! /= b;
    }
    beta.push(b);
    if (m === capacity) {
      capacity = Math.min(rangeDim, capacity * 2);
      const grown = new Float64Array(capacity * d);
      grown.set(Q);
      Q = grown;
    }
    Q.set(w, m * d);
    m++;
  }
}

function tridiagonalEigen(alpha: number[], beta: number[]): { vals: number[]; vecs: Matrix; order: number[] } {
  const m = alpha.length;
  const T = Matrix.zeros(m, m);
  for (let i = 0; i < m; i++) {
    T.set(i, i, alpha[i]!);
    if (i + 1 < m) {
      T.set(i, i + 1, beta[i]!);
      T.set(i + 1, i, beta[i]!);
    }
  }
  const evd = new EigenvalueDecomposition(T, { assumeSymmetric: true });
  const vals = evd.realEigenvalues;
  const order = vals.map((_, i) => i).sort((x, y) => vals[y]! - vals[x]!);
  return { vals, vecs: evd.eigenvectorMatrix, order };
}

function ritzConverged(alpha: number[], beta: number[], bLast: number, k: number, tol: number): boolean {
  const { vals, vecs, order } = tridiagonalEigen(alpha, beta);
  const m = alpha.length;
  const scale = Math.abs(vals[order[0]!]!);
  for (let c = 0; c < k; c++) {
    const s = vecs.get(m - 1, order[c]!);
    if (Math.abs(bLast * s) > tol * scale) return false;
  }
  return true;
}

function ritzPairs(alpha: number[], beta: number[], Q: Float64Array, m: number, d: number, k: number, steps: number): SymEigen {
  const { vals, vecs, order } = tridiagonalEigen(alpha, beta.slice(0, m - 1));
  const values = new Float64Array(k);
  const vectors = new Float64Array(d * k);
  const v = new Float64Array(d);
  for (let c = 0; c < k; c++) {
    const src = order[c]!;
    values[c] = vals[src]!;
    v.fill(0);
    for (let j = 0; j < m; j++) {
      const s = vecs.get(j, src);
      const off = j * d;
      for (let t = 0; t < d; t++) v[t]! += s * Q[off + t]!;
    }
    const nv = norm(v);
    for (let t = 0; t < d; t++) vectors[t * k + c] = v[t]! / nv;
  }
  return { values, vectors, steps };
}

function identityColumns(d: number, k: number): Float64Array {
  const v = new Float64Array(d * k);
  for (let c = 0; c < k; c++) v[c * k + c] = 1;
  return v;
}
