/**
 * Projection of a spectrum with missing variables onto a fitted PCA model by trimmed score
 * regression (TSR; Arteaga & Ferrer 2002, J. Chemometrics 16:408–418; the same estimator as
 * written by Folch-Fortuny, Arteaga & Ferrer 2015, Chemom. Intell. Lab. Syst. 146:77–88):
 *
 *   t̂ = Θ P#ᵀP# (P#ᵀ S## P#)⁻¹ P#ᵀ x#
 *
 * x# the centred observed variables, P# the rows of the loadings for them, Θ = diag(λ₁…λ_A) the
 * score variances and S## the block of the calibration covariance for the observed variables. The
 * regression of the full scores on the trimmed scores P#ᵀx# uses S = PΘPᵀ + R; the model file does
 * not keep the p × p residual covariance R, so the monitor takes it as isotropic in the residual
 * subspace, R = σ²(I − PPᵀ) with σ² = θ₁ / (p − A) (θ₁ the trace of the discarded part, which the
 * model keeps). Then P#ᵀS##P# = MΘM + σ²(M − M²) with M = P#ᵀP# = I − P*ᵀP* (P* the rows of the
 * missing variables), so a spectrum costs one pass over the observed variables plus O(m·A² + A³)
 * for m missing ones. A full covariance can be given instead (used by the checks against numpy;
 * O(p²·A) per spectrum).
 *
 * With nothing missing t̂ equals the ordinary projection Pᵀx exactly. T² is Σ t̂²/λ; Q is the sum of
 * squared residuals over the observed variables scaled by p / p# (so its size is comparable with
 * the full-spectrum Q limit; our choice, stated in docs/bad-pixels.md). The residual of a missing
 * variable is 0.
 *
 * All buffers are allocated at creation; project() allocates nothing and returns the same object
 * each call (copy what you keep).
 */
import type { PcaModel } from './pca-model.ts';

export interface MissingProjection {
  scores: Float64Array;
  /** Residual on the observed variables; 0 at the missing ones. */
  residual: Float64Array;
  t2: number;
  /** Q over the observed variables, scaled by p / observed. */
  q: number;
  /** Q over the observed variables, unscaled. */
  qObserved: number;
  missing: number;
  observed: number;
  /** False when the regression cannot be solved (too many variables missing for the model). */
  ok: boolean;
}

export interface TsrProjector {
  /**
   * x: the spectrum (model variables, preprocessed); missing[j] ≠ 0 marks variable j as missing
   * (its value in x is ignored).
   */
  project(x: ArrayLike<number>, missing: ArrayLike<number>): MissingProjection;
}

export interface TsrOptions {
  /** Full p × p calibration covariance (row-major); default: PΘPᵀ + σ²(I − PPᵀ) as above. */
  covariance?: Float64Array;
}

/** In-place Cholesky of the A × A matrix G (lower triangle); false when not positive definite. */
function cholesky(G: Float64Array, A: number): boolean {
  for (let j = 0; j < A; j++) {
    let d = G[j * A + j]!;
    for (let k = 0; k < j; k++) d -= G[j * A + k]! * G[j * A + k]!;
    if (!(d > 0)) return false;
    const l = Math.sqrt(d);
    G[j * A + j] = l;
    for (let i = j + 1; i < A; i++) {
      let s = G[i * A + j]!;
      for (let k = 0; k < j; k++) s -= G[i * A + k]! * G[j * A + k]!;
      G[i * A + j] = s / l;
    }
  }
  return true;
}

export function createTsrProjector(m: PcaModel, opts: TsrOptions = {}): TsrProjector {
  const p = m.nVariables;
  const A = m.nComponents;
  const P = m.loadings.data; // p × A row-major
  const mean = Float64Array.from(m.mean);
  const lam = Float64Array.from(m.eigenvalues);
  const S = opts.covariance ?? null;
  if (S && S.length !== p * p) throw new RangeError(`TSR: covariance has ${S.length} entries; the model needs ${p} × ${p}`);
  const sigma2 = p > A ? Math.max(0, m.residualTheta[0]) / (p - A) : 0;
  const out: MissingProjection = { scores: new Float64Array(A), residual: new Float64Array(p), t2: 0, q: 0, qObserved: 0, missing: 0, observed: p, ok: true };
  const z = out.residual; // centred observed values, later the residual
  const u = new Float64Array(A);
  const M = new Float64Array(A * A);
  const G = new Float64Array(A * A);
  const y = new Float64Array(A);
  const W = S ? new Float64Array(p * A) : null; // S## P# (full-covariance route only)
  const t = out.scores;

  return {
    project(x, missing) {
      if (x.length !== p) throw new RangeError(`TSR projection: spectrum has ${x.length} values, the model ${p}`);
      if (missing.length !== p) throw new RangeError(`TSR projection: missing mask has ${missing.length} entries, the model ${p}`);
      u.fill(0);
      let nMiss = 0;
      for (let j = 0; j < p; j++) {
        if (missing[j]) {
          z[j] = 0;
          nMiss++;
          continue;
        }
        const v = x[j]! - mean[j]!;
        z[j] = v;
        const o = j * A;
        for (let a = 0; a < A; a++) u[a] += v * P[o + a]!;
      }
      const nObs = p - nMiss;
      out.missing = nMiss;
      out.observed = nObs;
      // M = P#ᵀP# = I − P*ᵀP*
      M.fill(0);
      for (let a = 0; a < A; a++) M[a * A + a] = 1;
      if (nMiss > 0) {
        for (let j = 0; j < p; j++) {
          if (!missing[j]) continue;
          const o = j * A;
          for (let a = 0; a < A; a++) {
            const pa = P[o + a]!;
            for (let b = 0; b <= a; b++) M[a * A + b] -= pa * P[o + b]!;
          }
        }
        for (let a = 0; a < A; a++) for (let b = a + 1; b < A; b++) M[a * A + b] = M[b * A + a]!;
      }
      if (W && S) {
        // G = P#ᵀ S## P#: W = S## P# over observed rows, then P#ᵀ W.
        for (let i = 0; i < p; i++) {
          const wo = i * A;
          for (let a = 0; a < A; a++) W[wo + a] = 0;
          if (missing[i]) continue;
          const so = i * p;
          for (let j = 0; j < p; j++) {
            if (missing[j]) continue;
            const s = S[so + j]!;
            const po = j * A;
            for (let a = 0; a < A; a++) W[wo + a] += s * P[po + a]!;
          }
        }
        G.fill(0);
        for (let i = 0; i < p; i++) {
          if (missing[i]) continue;
          const o = i * A;
          for (let a = 0; a < A; a++) {
            const pa = P[o + a]!;
            for (let b = 0; b <= a; b++) G[a * A + b] += pa * W[o + b]!;
          }
        }
      } else {
        // G = MΘM + σ²(M − M²)
        for (let a = 0; a < A; a++) {
          for (let b = 0; b <= a; b++) {
            let mtm = 0;
            let mm = 0;
            for (let k = 0; k < A; k++) {
              const mak = M[a * A + k]!;
              const mkb = M[k * A + b]!;
              mtm += mak * lam[k]! * mkb;
              mm += mak * mkb;
            }
            G[a * A + b] = mtm + sigma2 * (M[a * A + b]! - mm);
          }
        }
      }
      // Solve G y = u by Cholesky (lower triangle of G).
      out.ok = nObs > 0 && cholesky(G, A);
      if (!out.ok) {
        t.fill(NaN);
        out.t2 = NaN;
        out.q = NaN;
        out.qObserved = NaN;
        return out;
      }
      for (let a = 0; a < A; a++) {
        let s = u[a]!;
        for (let k = 0; k < a; k++) s -= G[a * A + k]! * y[k]!;
        y[a] = s / G[a * A + a]!;
      }
      for (let a = A - 1; a >= 0; a--) {
        let s = y[a]!;
        for (let k = a + 1; k < A; k++) s -= G[k * A + a]! * y[k]!;
        y[a] = s / G[a * A + a]!;
      }
      // t = Θ M y
      let t2 = 0;
      for (let a = 0; a < A; a++) {
        let s = 0;
        for (let k = 0; k < A; k++) s += M[a * A + k]! * y[k]!;
        const ta = lam[a]! * s;
        t[a] = ta;
        t2 += (ta * ta) / lam[a]!;
      }
      // Residual over the observed variables.
      let q = 0;
      for (let j = 0; j < p; j++) {
        if (missing[j]) continue;
        const o = j * A;
        let r = z[j]!;
        for (let a = 0; a < A; a++) r -= P[o + a]! * t[a]!;
        z[j] = r;
        q += r * r;
      }
      out.t2 = t2;
      out.qObserved = q;
      out.q = nObs > 0 ? (q * p) / nObs : NaN;
      return out;
    },
  };
}
