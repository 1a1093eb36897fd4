/**
 * Evidence for the Model bench: variance explained, cross-validated PRESS per component count
 * (Bro et al. 2008 element-wise k-fold, via core/pca), T² and Q of every calibration spectrum with
 * the limits, the loadings on the model axis and the PLS cross-validation when there is one.
 */
import type { MonitoringModel } from './monitoring-model.ts';
import type { PropertyEvidence } from './property-model.ts';

export interface CalibrationDiagnostics {
  components: number;
  explained: number[];
  cumulative: number[];
  eigenvalues: number[];
  press: number[];
  recommended: number;
  cvMethod: string;
  /** How the recommendation was made (the one-standard-error rule), and whether it is the largest count searched. */
  cvRule: string | null;
  cvAtSearchLimit: boolean;
  /** Per calibration spectrum, in build order. */
  sampleT2: number[];
  sampleQ: number[];
  sampleBatch: string[];
  sampleIndex: number[];
  /** Calibration spectra above the limits (candidates to inspect or exclude). */
  outliers: { batch: string; index: number; t2: number; q: number }[];
  limits: { t2: number; q: number; combined: number; confidence: number; t2Method: string; qMethod: string };
  loadings: { axis: number[]; pcs: number[][] };
  pls: { name: string; unit: string; components: number; rmsecv: number[] | null; evidence: PropertyEvidence | null } | null;
}

export function calibrationDiagnostics(m: MonitoringModel): CalibrationDiagnostics {
  const { pca, limits, meta } = m;
  const A = pca.nComponents;
  const p = pca.nVariables;
  const ids = meta.batches.map((b) => b.id);
  const sampleBatch = meta.sampleOrigin.map((o) => ids[o.batch]);
  const sampleIndex = meta.sampleOrigin.map((o) => o.index);
  const sampleT2 = Array.from(pca.calibrationT2);
  const sampleQ = Array.from(pca.calibrationQ);
  const outliers: CalibrationDiagnostics['outliers'] = [];
  for (let i = 0; i < sampleT2.length; i++) {
    if (sampleT2[i] > limits.t2.value || sampleQ[i] > limits.q.value) outliers.push({ batch: sampleBatch[i], index: sampleIndex[i], t2: sampleT2[i], q: sampleQ[i] });
  }
  return {
    components: A,
    explained: [...pca.explained],
    cumulative: [...pca.cumulative],
    eigenvalues: Array.from(pca.eigenvalues),
    press: meta.pcaCv.press,
    recommended: meta.pcaCv.recommended,
    cvMethod: meta.pcaCv.method,
    cvRule: meta.pcaCv.rule ?? null,
    cvAtSearchLimit: meta.pcaCv.atSearchLimit ?? false,
    sampleT2,
    sampleQ,
    sampleBatch,
    sampleIndex,
    outliers,
    limits: { t2: limits.t2.value, q: limits.q.value, combined: limits.combined.value, confidence: limits.t2.confidence, t2Method: limits.t2.method, qMethod: limits.q.method },
    loadings: { axis: Array.from(m.chain.outputAxis), pcs: Array.from({ length: A }, (_, a) => Array.from({ length: p }, (_, j) => pca.loadings.data[j * A + a])) },
    pls: m.pls ? { name: m.pls.name, unit: m.pls.unit, components: m.pls.components, rmsecv: m.pls.rmsecv, evidence: m.pls.evidence } : null,
  };
}
