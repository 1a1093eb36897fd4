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
      // Scores four components per pass over the spectrum (one load of e[j] feeds four products).
      let a = 0;
      for (; a + 3 < A; a += 4) {
        const o0 = a * p, o1 = o0 + p, o2 = o1 + p, o3 = o2 + p;
        let s0 = 0, s1 = 0, s2 = 0, s3 = 0;
        for (let j = 0; j < p; j++) {
          const v = e[j]!;
          s0 += v * PT[o0 + j]!;
          s1 += v * PT[o1 + j]!;
          s2 += v * PT[o2 + j]!;
          s3 += v * PT[o3 + j]!;
        }
        t[a] = s0; t[a + 1] = s1; t[a + 2] = s2; t[a + 3] = s3;
      }
      for (; a < A; a++) {
        const o = a * p;
        let s = 0;
        for (let j = 0; j < p; j++) s += e[j]! * PT[o + j]!;
        t[a] = s;
      }
      let t2 = 0;
      for (let b = 0; b < A; b++) t2 += t[b]! * t[b]! * invLambda[b]!;
      // Residual e − Pt, four components per pass; Q from the finished residual.
      a = 0;
      for (; a + 3 < A; a += 4) {
        const o0 = a * p, o1 = o0 + p, o2 = o1 + p, o3 = o2 + p;
        const s0 = t[a]!, s1 = t[a + 1]!, s2 = t[a + 2]!, s3 = t[a + 3]!;
        for (let j = 0; j < p; j++) e[j] -= s0 * PT[o0 + j]! + s1 * PT[o1 + j]! + s2 * PT[o2 + j]! + s3 * PT[o3 + j]!;
      }
      for (; a < A; a++) {
        const s = t[a]!;
        const o = a * p;
        for (let j = 0; j < p; j++) e[j] -= s * PT[o + j]!;
      }
      let q = 0;
      for (let j = 0; j < p; j++) q += e[j]! * e[j]!;
      out.t2 = t2;
      out.q = q;
      return out;
    },
  };
}
