/**
 * Control limits for the PLS X model, so a prediction from a spectrum unlike the calibration set
 * is flagged: Hotelling T² of the X scores for a new observation, A(n−1)(n+1)/(n(n−A))·F(conf; A, n−A)
 * (Tracy, Young & Mason 1992), and Q of the X residual by Jackson & Mudholkar (1979) from
 * θ1…θ3 of the calibration residual covariance; where the Jackson–Mudholkar form is undefined
 * (h0 ≤ 0) the Box (1954) g·χ²_h form (Nomikos & MacGregor 1995) is used. The method is recorded.
 */
import { scatterMatrix } from '../pca/gram-kernel.ts';
import { t2LimitNew, qLimitJacksonMudholkar, qLimitBox, qLimitBoxMoments, jacksonMudholkarH0 } from '../limits/index.ts';

/**
 * Above this size of the smaller Gram matrix, θ1…θ3 (cost min(n, p)³) are not computed and the
 * Q limit comes from the moments of the calibration Q values instead (Box 1954 as used by
 * Nomikos & MacGregor 1995: g = v/2m, h = 2m²/v); the method is recorded.
 */
export const PLS_THETA_MAX_GRAM = 1024;

export interface PlsXLimits {
  confidence: number;
  t2Limit: number;
  t2Method: string;
  qLimit: number;
  qMethod: string;
}

/**
 * θ_i = trace(G^i), G = EᵀE/(n−1) — computed on the smaller Gram matrix (EEᵀ when n ≤ p; the
 * nonzero eigenvalues are the same). Cost min(n, p)³: fine for PLS calibration sets of hundreds.
 */
export function residualThetaOf(E: Float64Array, n: number, p: number): [number, number, number] {
  const byRows = n <= p;
  const d = byRows ? n : p;
  const G = new Float64Array(d * d);
  if (byRows) {
    for (let i = 0; i < n; i++) {
      const oi = i * p;
      for (let k = i; k < n; k++) {
        const ok = k * p;
        let s = 0;
        for (let j = 0; j < p; j++) s += E[oi + j]! * E[ok + j]!;
        G[i * d + k] = s / (n - 1);
        G[k * d + i] = s / (n - 1);
      }
    }
  } else {
    // EᵀE by the blocked Gram kernel of core/pca (same sums, about 10× faster on tall sets).
    const S = scatterMatrix(E, n, p, new Float64Array(p));
    for (let i = 0; i < d * d; i++) G[i] = S[i]! / (n - 1);
  }
  let t1 = 0;
  let t2 = 0;
  let t3 = 0;
  for (let i = 0; i < d; i++) t1 += G[i * d + i]!;
  for (let i = 0; i < d * d; i++) t2 += G[i]! * G[i]!;
  // trace(G³) = Σ_ij G_ij (G²)_ij, G symmetric.
  const row = new Float64Array(d);
  for (let i = 0; i < d; i++) {
    row.fill(0);
    for (let k = 0; k < d; k++) {
      const g = G[i * d + k]!;
      if (g === 0) continue;
      const ok = k * d;
      for (let j = 0; j < d; j++) row[j]! += g * G[ok + j]!;
    }
    for (let j = 0; j < d; j++) t3 += G[i * d + j]! * row[j]!;
  }
  return [t1, t2, t3];
}

/** Q of each calibration row: ‖E_i‖². */
export function calibrationQ(E: Float64Array, n: number, p: number): Float64Array {
  const q = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    let s = 0;
    for (let j = 0; j < p; j++) s += E[i * p + j]! * E[i * p + j]!;
    q[i] = s;
  }
  return q;
}

export function plsXLimitsFromCalibrationQ(A: number, n: number, qValues: Float64Array, confidence: number): PlsXLimits {
  const t2Limit = t2LimitNew(A, n, confidence);
  return { confidence, t2Limit, t2Method: 't2-f-new', qLimit: qLimitBoxMoments(qValues, confidence), qMethod: 'q-box-moments' };
}

export function plsXLimits(A: number, n: number, theta: [number, number, number], confidence: number): PlsXLimits {
  const t2Limit = t2LimitNew(A, n, confidence);
  if (!(theta[0] > 0 && theta[1] > 0 && theta[2] > 0)) {
    // No residual variance left (as many components as the rank): any residual is outside.
    return { confidence, t2Limit, t2Method: 't2-f-new', qLimit: 0, qMethod: 'q-zero-residual' };
  }
  const h0 = jacksonMudholkarH0(theta);
  if (h0 > 0) {
    try {
      return { confidence, t2Limit, t2Method: 't2-f-new', qLimit: qLimitJacksonMudholkar(theta, confidence), qMethod: 'q-jackson-mudholkar' };
    } catch {
      // bracket ≤ 0 at this confidence: fall through to Box.
    }
  }
  return { confidence, t2Limit, t2Method: 't2-f-new', qLimit: qLimitBox(theta[0], theta[1], confidence), qMethod: 'q-box' };
}
