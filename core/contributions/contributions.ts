/**
 * Variable contributions to T² and Q of one observation under a PCA model.
 * - T² contributions (Westerhuis, Gurden & Smilde 2000, Chemom. Intell. Lab. Syst. 51:95):
 *   c_j = x̃_j·(PΛ⁻¹t)_j, summing to T² (x̃ = x − mean, t = Pᵀx̃).
 * - Q contributions: e_j², e = x̃ − Pt, summing to Q.
 * - Reconstruction-based contributions (Alcala & Qin 2009, Automatica 45:1593):
 *   RBC_j = (ξ_jᵀMx̃)²/(ξ_jᵀMξ_j) with M = PΛ⁻¹Pᵀ (T²) or I − PPᵀ (Q).
 */
import type { PcaModel } from '../pca/pca-model.ts';

export interface Contributions {
  t2: Float64Array;
  q: Float64Array;
  rbcT2: Float64Array;
  rbcQ: Float64Array;
}

export interface ContributionCalculator {
  /** Buffers are reused between calls: copy what you keep. */
  compute(x: ArrayLike<number>): Contributions;
}

export function createContributionCalculator(m: PcaModel): ContributionCalculator {
  const p = m.nVariables;
  const A = m.nComponents;
  const P = m.loadings.data;
  const invLambda = Float64Array.from(m.eigenvalues, (v) => 1 / v);
  // Diagonals of M: Σ_a P_ja²/λ_a (T²) and 1 − Σ_a P_ja² (Q).
  const mT2 = new Float64Array(p);
  const mQ = new Float64Array(p);
  for (let j = 0; j < p; j++) {
    let s = 0;
    let c = 0;
    for (let a = 0; a < A; a++) {
      const v = P[j * A + a]!;
      s += v * v * invLambda[a]!;
      c += v * v;
    }
    mT2[j] = s;
    mQ[j] = 1 - c;
  }
  const xc = new Float64Array(p);
  const t = new Float64Array(A);
  const out: Contributions = { t2: new Float64Array(p), q: new Float64Array(p), rbcT2: new Float64Array(p), rbcQ: new Float64Array(p) };
  return {
    compute(x: ArrayLike<number>): Contributions {
      if (x.length !== p) throw new RangeError(`contributions: spectrum has ${x.length} values, the model ${p}`);
      for (let j = 0; j < p; j++) xc[j] = x[j]! - m.mean[j]!;
      t.fill(0);
      for (let j = 0; j < p; j++) {
        const v = xc[j]!;
        for (let a = 0; a < A; a++) t[a] += P[j * A + a]! * v;
      }
      for (let j = 0; j < p; j++) {
        let w = 0; // (PΛ⁻¹t)_j = (Mx̃)_j for the T² metric
        let r = 0; // (Pt)_j
        for (let a = 0; a < A; a++) {
          const pj = P[j * A + a]!;
          w += pj * invLambda[a]! * t[a]!;
          r += pj * t[a]!;
        }
        const e = xc[j]! - r;
        out.t2[j] = xc[j]! * w;
        out.q[j] = e * e;
        out.rbcT2[j] = mT2[j]! > 0 ? (w * w) / mT2[j]! : 0;
        // A variable lying wholly in the model plane (1 − Σ P_ja² = 0) cannot be reconstructed along Q.
        out.rbcQ[j] = mQ[j]! > 1e-14 ? (e * e) / mQ[j]! : 0;
      }
      return out;
    },
  };
}

/** Contributions of one observation (allocates fresh arrays; use the calculator in hot paths). */
export function contributions(m: PcaModel, x: ArrayLike<number>): Contributions {
  const c = createContributionCalculator(m).compute(x);
  return { t2: c.t2, q: c.q, rbcT2: c.rbcT2, rbcQ: c.rbcQ };
}
