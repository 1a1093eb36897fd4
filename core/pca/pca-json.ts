/**
 * Plain-JSON form of a PcaModel. Numbers are written by JSON.stringify's shortest round-trip form,
 * so pcaFromJSON(JSON.parse(JSON.stringify(pcaToJSON(m)))) restores every float64 exactly.
 */
import { z } from 'zod';
import { denseMatrix } from '../linalg/dense-matrix.ts';
import type { PcaModel } from './pca-model.ts';

const finite = z.number().finite();
const pcaJsonSchema = z.object({
  format: z.literal('tideline-pca'),
  version: z.literal(1),
  nComponents: z.number().int().min(1),
  nVariables: z.number().int().min(1),
  nSamples: z.number().int().min(2),
  centered: z.boolean(),
  mean: z.array(finite),
  /** p × A, row-major. */
  loadings: z.array(finite),
  eigenvalues: z.array(finite.positive()),
  explained: z.array(finite),
  cumulative: z.array(finite),
  totalVariance: finite.nonnegative(),
  residualTheta: z.tuple([finite, finite, finite]),
  calibrationT2: z.array(finite),
  calibrationQ: z.array(finite),
});
export type PcaJson = z.infer<typeof pcaJsonSchema>;

export function pcaToJSON(m: PcaModel): PcaJson {
  return {
    format: 'tideline-pca',
    version: 1,
    nComponents: m.nComponents,
    nVariables: m.nVariables,
    nSamples: m.nSamples,
    centered: m.centered,
    mean: Array.from(m.mean),
    loadings: Array.from(m.loadings.data),
    eigenvalues: Array.from(m.eigenvalues),
    explained: [...m.explained],
    cumulative: [...m.cumulative],
    totalVariance: m.totalVariance,
    residualTheta: [...m.residualTheta],
    calibrationT2: Array.from(m.calibrationT2),
    calibrationQ: Array.from(m.calibrationQ),
  };
}

export function pcaFromJSON(j: unknown): PcaModel {
  const parsed = pcaJsonSchema.safeParse(j);
  if (!parsed.success) {
    const issue = parsed.error.issues[0]!;
    throw new TypeError(`PCA model JSON: ${issue.path.join('.') || '(root)'}: ${issue.message}`);
  }
  const v = parsed.data;
  const p = v.nVariables;
  const A = v.nComponents;
  const n = v.nSamples;
  const expect = (name: string, got: number, want: number): void => {
    if (got !== want) throw new RangeError(`PCA model JSON: ${name} has ${got} values; ${want} expected`);
  };
  expect('mean', v.mean.length, p);
  expect('loadings', v.loadings.length, p * A);
  expect('eigenvalues', v.eigenvalues.length, A);
  expect('explained', v.explained.length, A);
  expect('cumulative', v.cumulative.length, A);
  expect('calibrationT2', v.calibrationT2.length, n);
  expect('calibrationQ', v.calibrationQ.length, n);
  if (A > p) throw new RangeError(`PCA model JSON: ${A} components for ${p} variables`);
  return {
    nComponents: A,
    nVariables: p,
    nSamples: n,
    centered: v.centered,
    mean: Float64Array.from(v.mean),
    loadings: denseMatrix(p, A, Float64Array.from(v.loadings)),
    eigenvalues: Float64Array.from(v.eigenvalues),
    explained: [...v.explained],
    cumulative: [...v.cumulative],
    totalVariance: v.totalVariance,
    residualTheta: [v.residualTheta[0], v.residualTheta[1], v.residualTheta[2]],
    calibrationT2: Float64Array.from(v.calibrationT2),
    calibrationQ: Float64Array.from(v.calibrationQ),
  };
}
