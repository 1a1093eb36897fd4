/**
 * A fitted PLS1 model (one property from spectra) and its JSON form. Matrices are p × A,
 * row-major; float64 values survive toJSON → JSON text → loadPls1 exactly.
 */
import { z } from 'zod';
import { denseMatrix, type DenseMatrix } from '../linalg/dense-matrix.ts';

export const PLS1_FORMAT = 'tideline-pls1';

export interface Pls1Model {
  readonly components: number;
  readonly nSamples: number;
  readonly nVariables: number;
  readonly center: boolean;
  /** Column means of the calibration X (zeros when center is false). */
  readonly xMean: Float64Array;
  /** Mean of the calibration y (0 when center is false). */
  readonly yMean: number;
  /** X weights W, p × A (unit columns). */
  readonly weights: DenseMatrix;
  /** X loadings P, p × A. */
  readonly loadings: DenseMatrix;
  /** y loadings q, length A. */
  readonly yLoadings: Float64Array;
  /** Score rotation R = W(PᵀW)⁻¹, p × A: scores of a centred spectrum x are Rᵀx. */
  readonly rotations: DenseMatrix;
  /** Regression vector for A components: ŷ = intercept + bᵀx. */
  readonly coefficients: Float64Array;
  readonly intercept: number;
  /** Variances of the calibration X scores (n − 1), length A: the T² scaling. */
  readonly scoreVariance: Float64Array;
  /** θ1…θ3 of the calibration X residual covariance (Jackson & Mudholkar 1979); null when not computed (large sets, see x-limits.ts). */
  readonly residualTheta: [number, number, number] | null;
  /** X-model limits for flagging extrapolation, with the method used. */
  readonly limits: { confidence: number; t2Limit: number; t2Method: string; qLimit: number; qMethod: string };
  /** Calibration y range, for context. */
  readonly yRange: [number, number];
  toJSON(): Pls1Json;
}

const finite = z.number().refine(Number.isFinite, { message: 'must be a finite number' });
const matrixJson = z.strictObject({ rows: z.number().int().min(1), cols: z.number().int().min(1), data: z.array(finite) }).refine((m) => m.data.length === m.rows * m.cols, {
  message: 'data length must equal rows × cols',
});

export const pls1JsonSchema = z.strictObject({
  format: z.literal(PLS1_FORMAT),
  components: z.number().int().min(1),
  nSamples: z.number().int().min(2),
  nVariables: z.number().int().min(1),
  center: z.boolean(),
  xMean: z.array(finite),
  yMean: finite,
  weights: matrixJson,
  loadings: matrixJson,
  yLoadings: z.array(finite),
  rotations: matrixJson,
  coefficients: z.array(finite),
  intercept: finite,
  scoreVariance: z.array(finite),
  residualTheta: z.tuple([finite, finite, finite]).nullable(),
  limits: z.strictObject({ confidence: finite, t2Limit: finite, t2Method: z.string(), qLimit: finite, qMethod: z.string() }),
  yRange: z.tuple([finite, finite]),
});
export type Pls1Json = z.infer<typeof pls1JsonSchema>;

type Pls1Fields = Omit<Pls1Model, 'toJSON'>;

const mJson = (m: DenseMatrix) => ({ rows: m.rows, cols: m.cols, data: Array.from(m.data) });

export function makePls1Model(f: Pls1Fields): Pls1Model {
  return {
    ...f,
    toJSON(): Pls1Json {
      return {
        format: PLS1_FORMAT,
        components: f.components,
        nSamples: f.nSamples,
        nVariables: f.nVariables,
        center: f.center,
        xMean: Array.from(f.xMean),
        yMean: f.yMean,
        weights: mJson(f.weights),
        loadings: mJson(f.loadings),
        yLoadings: Array.from(f.yLoadings),
        rotations: mJson(f.rotations),
        coefficients: Array.from(f.coefficients),
        intercept: f.intercept,
        scoreVariance: Array.from(f.scoreVariance),
        residualTheta: f.residualTheta ? [...f.residualTheta] : null,
        limits: { ...f.limits },
        yRange: [...f.yRange],
      };
    },
  };
}

/** Rebuild a PLS1 model from its JSON (validated with zod; shapes cross-checked). */
export function loadPls1(json: unknown): Pls1Model {
  const r = pls1JsonSchema.safeParse(json);
  if (!r.success) {
    const i = r.error.issues[0]!;
    throw new RangeError(`PLS1 model JSON: ${i.path.join('.') || '(root)'}: ${i.message}`);
  }
  const j = r.data;
  const p = j.nVariables;
  const A = j.components;
  const checks: [string, number, number][] = [
    ['xMean length', j.xMean.length, p],
    ['coefficients length', j.coefficients.length, p],
    ['yLoadings length', j.yLoadings.length, A],
    ['scoreVariance length', j.scoreVariance.length, A],
  ];
  for (const [name, got, want] of [['weights', j.weights, 0], ['loadings', j.loadings, 0], ['rotations', j.rotations, 0]] as const) {
    checks.push([`${name} rows`, got.rows, p], [`${name} cols`, got.cols, A]);
    void want;
  }
  for (const [name, got, want] of checks) {
    if (got !== want) throw new RangeError(`PLS1 model JSON: ${name} is ${got}; expected ${want}`);
  }
  const mat = (m: { rows: number; cols: number; data: number[] }) => denseMatrix(m.rows, m.cols, Float64Array.from(m.data));
  return makePls1Model({
    components: A,
    nSamples: j.nSamples,
    nVariables: p,
    center: j.center,
    xMean: Float64Array.from(j.xMean),
    yMean: j.yMean,
    weights: mat(j.weights),
    loadings: mat(j.loadings),
    yLoadings: Float64Array.from(j.yLoadings),
    rotations: mat(j.rotations),
    coefficients: Float64Array.from(j.coefficients),
    intercept: j.intercept,
    scoreVariance: Float64Array.from(j.scoreVariance),
    residualTheta: j.residualTheta ? [j.residualTheta[0], j.residualTheta[1], j.residualTheta[2]] : null,
    limits: { ...j.limits },
    yRange: [j.yRange[0], j.yRange[1]],
  });
}
