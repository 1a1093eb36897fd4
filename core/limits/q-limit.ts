/**
 * Q (SPE) control limits.
 * θ_i = Σ over discarded components of λ_j^i (covariance eigenvalues, n − 1 denominator).
 */
import { chi2Inv, normalInv } from '../stats/quantiles.ts';
import { checkConfidence, type Limit } from './limit.ts';

function checkTheta(theta: readonly number[], count: number, what: string): void {
  for (let i = 0; i < count; i++) {
    const v = theta[i];
    if (!(typeof v === 'number' && v > 0 && Number.isFinite(v))) {
      throw new RangeError(`${what}: θ${i + 1} = ${v} must be a positive finite number (is the residual space empty?)`);
    }
  }
}

/** h0 = 1 − 2θ1θ3/(3θ2²) of Jackson & Mudholkar (1979). */
export function jacksonMudholkarH0(theta: readonly [number, number, number]): number {
  const [t1, t2, t3] = theta;
  return 1 - (2 * t1 * t3) / (3 * t2 * t2);
}

/**
 * Jackson & Mudholkar (1979, Technometrics 21:341):
 * Q = θ1[c_α√(2θ2h0²)/θ1 + 1 + θ2h0(h0−1)/θ1²]^(1/h0).
 */
export function qLimitJacksonMudholkar(theta: readonly [number, number, number], confidence: number): number {
  const what = 'Q limit (Jackson–Mudholkar)';
  checkConfidence(confidence, what);
  checkTheta(theta, 3, what);
  const [t1, t2] = theta;
  const h0 = jacksonMudholkarH0(theta);
  if (!(h0 > 0)) {
    throw new RangeError(`${what}: h0 = ${h0} ≤ 0 for θ = (${theta.join(', ')}); the approximation is undefined here — use the Box (1954) form`);
  }
  const c = normalInv(confidence);
  const base = (c * Math.sqrt(2 * t2 * h0 * h0)) / t1 + 1 + (t2 * h0 * (h0 - 1)) / (t1 * t1);
  if (!(base > 0)) throw new RangeError(`${what}: bracket ${base} ≤ 0 at confidence ${confidence}; use the Box (1954) form`);
  return t1 * Math.pow(base, 1 / h0);
}

/** Box (1954) as used by Nomikos & MacGregor (1995): g·χ²(conf; h), g = θ2/θ1, h = θ1²/θ2. */
export function qLimitBox(theta1: number, theta2: number, confidence: number): number {
  const what = 'Q limit (Box g·χ²_h)';
  checkConfidence(confidence, what);
  checkTheta([theta1, theta2], 2, what);
  const g = theta2 / theta1;
  const h = (theta1 * theta1) / theta2;
  return g * chi2Inv(confidence, h);
}

/** Mean and variance (n − 1) of reference Q values, checked. */
export function qMoments(qValues: ArrayLike<number>): { mean: number; variance: number } {
  const n = qValues.length;
  if (n < 2) throw new RangeError(`Q limit (moments): needs at least 2 reference Q values, got ${n}`);
  let s = 0;
  for (let i = 0; i < n; i++) {
    const v = qValues[i]!;
    if (!(v >= 0) || !Number.isFinite(v)) throw new RangeError(`Q limit (moments): reference Q value ${i} = ${v} is not a finite non-negative number`);
    s += v;
  }
  const mean = s / n;
  let ss = 0;
  for (let i = 0; i < n; i++) {
    const d = qValues[i]! - mean;
    ss += d * d;
  }
  return { mean, variance: ss / (n - 1) };
}

/** Box g·χ²_h with moments of reference Q values (Nomikos & MacGregor 1995): g = v/(2m), h = 2m²/v. */
export function qLimitBoxMoments(qValues: ArrayLike<number>, confidence: number): number {
  const what = 'Q limit (Box, moments)';
  checkConfidence(confidence, what);
  const { mean, variance } = qMoments(qValues);
  if (!(mean > 0) || !(variance > 0)) throw new RangeError(`${what}: reference Q values have mean ${mean} and variance ${variance}; both must be positive`);
  const g = variance / (2 * mean);
  const h = (2 * mean * mean) / variance;
  return g * chi2Inv(confidence, h);
}

export type QMethod = 'q-jackson-mudholkar' | 'q-box' | 'q-box-moments';

export function qLimit(
  method: QMethod,
  source: { theta?: readonly [number, number, number]; qValues?: ArrayLike<number> },
  confidence: number,
): Limit {
  switch (method) {
    case 'q-jackson-mudholkar':
      if (!source.theta) throw new RangeError('Q limit (Jackson–Mudholkar) needs θ1, θ2, θ3');
      return { value: qLimitJacksonMudholkar(source.theta, confidence), confidence, method, reference: 'Jackson & Mudholkar 1979' };
    case 'q-box':
      if (!source.theta) throw new RangeError('Q limit (Box) needs θ1, θ2');
      return { value: qLimitBox(source.theta[0], source.theta[1], confidence), confidence, method, reference: 'Box 1954 g·χ²_h, as used by Nomikos & MacGregor 1995' };
    case 'q-box-moments':
      if (!source.qValues) throw new RangeError('Q limit (Box, moments) needs reference Q values');
      return { value: qLimitBoxMoments(source.qValues, confidence), confidence, method, reference: 'Box 1954 g·χ²_h with moments of reference Q (Nomikos & MacGregor 1995)' };
    default:
      throw new RangeError(`unknown Q limit method '${String(method)}' (use q-jackson-mudholkar, q-box or q-box-moments)`);
  }
}

/** The Q-limit method of a model build (settings.qMethod). */
export type QLimitSetting = 'jackson-mudholkar' | 'box';

/**
 * The global Q limit of a model with the method the model owner chose, from θ1…θ3 of the discarded
 * eigenvalues. Jackson–Mudholkar is undefined where h0 = 1 − 2θ1θ3/(3θ2²) ≤ 0 (one discarded
 * eigenvalue dominating many small ones) or where its bracket is not positive at this confidence;
 * there the Box (1954) g·χ²_h form is used instead, and `note` says so and why. g = θ2/θ1 and
 * h = θ1²/θ2 are returned with h0 so the evidence can show them.
 */
export function modelQLimit(theta: readonly [number, number, number], confidence: number, setting: QLimitSetting = 'jackson-mudholkar'): { limit: Limit; h0: number; g: number; h: number } {
  if (setting !== 'jackson-mudholkar' && setting !== 'box') throw new RangeError(`Q limit: unknown method "${String(setting)}" (use jackson-mudholkar or box)`);
  checkTheta(theta, 3, 'Q limit');
  const h0 = jacksonMudholkarH0(theta);
  const g = theta[1] / theta[0];
  const h = (theta[0] * theta[0]) / theta[1];
  if (setting === 'box') return { limit: qLimit('q-box', { theta }, confidence), h0, g, h };
  let why: string;
  if (h0 > 0) {
    const c = normalInv(confidence);
    const [t1, t2] = theta;
    const base = (c * Math.sqrt(2 * t2 * h0 * h0)) / t1 + 1 + (t2 * h0 * (h0 - 1)) / (t1 * t1);
    if (base > 0) return { limit: qLimit('q-jackson-mudholkar', { theta }, confidence), h0, g, h };
    why = `its bracket is ${base.toPrecision(3)} ≤ 0 at confidence ${confidence}`;
  } else why = `h0 = 1 − 2θ1θ3/(3θ2²) = ${h0.toPrecision(4)} ≤ 0`;
  const box = qLimit('q-box', { theta }, confidence);
  return {
    limit: { ...box, note: `Jackson–Mudholkar (1979) is undefined for these residual eigenvalues (${why}); the Box (1954) form g·χ²_h is used instead (g = ${g.toPrecision(4)}, h = ${h.toPrecision(4)})` },
    h0,
    g,
    h,
  };
}
