/**
 * Projection of one spectrum onto a fitted PCA model: scores, residual, T², Q.
 * All buffers are allocated once here; project() allocates nothing and returns the same object
 * each call (copy what you keep).
 */
import type { PcaModel } from './pca-model.ts';

export interface Projection {
  scores: Float64Array;
  residual: Float64Array;
  t2: number;
  q: number;
}

export interface Projector {
  project(x: ArrayLike<number>): Projection;
}

export function createProjector(m: PcaModel): Projector {
  const p = m.nVariables;
  const A = m.nComponents;
  const P = m.loadings.data;
  const PT = new Float64Array(A * p); // loadings transposed: contiguous per component
  for (let j = 0; j < p; j++) for (let a = 0; a < A; a++) PT[a * p + j] = P[j * A + a]!;
  const mean = Float64Array.from(m.mean);
  const invLambda = Float64Array.from(m.eigenvalues, (v) => 1 / v);
  const out: Projection = { scores: new Float64Array(A), residual: new Float64Array(p), t2: 0, q: 0 };
  const t = out.scores;
  const e = out.residual;
  return {
    project(x: ArrayLike<number>): Projection {
      if (x.length !== p) throw new RangeError(`projection: spectrum has ${x.length} values, the model ${p}`);
      for (let j = 0; j < p; j++) e[j] = x[j]! - mean[j]!;
      let t2 = 0;
      for (let a = 0; a < A; a++) {
        const po = a * p;
        let s0 = 0, s1 = 0;
        let j = 0;
        for (; j + 1 < p; j += 2) {
          s0 += e[j]! * PT[po + j]!;
          s1 += e[j + 1]! * PT[po + j + 1]!;
        }
        if (j < p) s0 += e[j]! * PT[po + j]!;
        const s = s0 + s1;
        t[a] = s;
        t2 += s * s * invLambda[a]!;
      }
      for (let a = 0; a < A; a++) {
        const s = t[a]!;
        const po = a * p;
        for (let j = 0; j < p; j++) e[j] -= s * PT[po + j]!;
      }
      let q = 0;
      for (let j = 0; j < p; j++) q += e[j]! * e[j]!;
      out.t2 = t2;
      out.q = q;
      return out;
    },
  };
}
