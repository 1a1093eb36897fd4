/**
 * Response shapes the dashboard can use but core/api/rest.ts does not (yet) define. The dashboard
 * asks for them and, when the server answers 404, shows what it has and says plainly what is
 * missing. Proposed to the server owner for core/api (additive).
 */

/** GET /api/batches/:batch/spectrum-view?seq= — one spectrum raw and preprocessed, with the golden band at its progress. */
export interface SpectrumView {
  batch: string;
  seq: number;
  t: number;
  raw: { axis: number[]; values: number[]; goldenMean: number[] | null; goldenLower: number[] | null; goldenUpper: number[] | null };
  preprocessed: { axis: number[]; values: number[]; goldenMean: number[] | null; goldenLower: number[] | null; goldenUpper: number[] | null } | null;
}

/** GET /api/models/versions/:version/calibration — diagnostics for Model bench. */
export interface CalibrationView {
  versionId: string;
  explained: number[];
  cumulative: number[];
  /** Cross-validation PRESS (or RMSECV) per number of components, 1…max. */
  press: number[];
  recommended: number;
  modelAxis: number[];
  /** loadings[pc-1][variable] */
  loadings: number[][];
  samples: { batch: string; index: number; t2: number; q: number; excluded: boolean }[];
  limits: { t2: number; q: number; confidence: number };
}

/** GET /api/batches/:batch/comparison?model= — DTW-aligned comparison with the golden batches. */
export interface BatchComparisonView {
  batch: string;
  model: { versionId: string; name: string; version: number };
  /** Aligned batch progress (envelope axis) and scores per PC. */
  progress: number[];
  scores: number[][];
  t2: number[];
  q: number[];
  /** Time (min) of each aligned point on the batch's own clock. */
  elapsedMin: number[];
  firstExit: { elapsedMin: number; progress: number; pc: number | null; stat: string } | null;
  departure: { fromMin: number; toMin: number } | null;
  regions: { name: string; from: number; to: number; assignment: string; t2: number; q: number }[];
}
