/**
 * Figures of merit for predicted against reference values: RMSEP = √(Σe²/n), bias = mean(ŷ − y),
 * SEP = standard deviation of e (n − 1), R² = 1 − Σe²/Σ(y − ȳ)² (e = ŷ − y).
 */
export interface RegressionMetrics {
  n: number;
  rmsep: number;
  r2: number;
  bias: number;
  sep: number;
}

export function regressionMetrics(yTrue: ArrayLike<number>, yPred: ArrayLike<number>): RegressionMetrics {
  const n = yTrue.length;
  if (yPred.length !== n) throw new RangeError(`regression metrics: ${yTrue.length} reference values but ${yPred.length} predictions`);
  if (n < 1) throw new RangeError('regression metrics: no values');
  let sy = 0;
  let se = 0;
  for (let i = 0; i < n; i++) {
    if (!Number.isFinite(yTrue[i]!) || !Number.isFinite(yPred[i]!)) throw new RangeError(`regression metrics: value ${i} is not finite`);
    sy += yTrue[i]!;
    se += yPred[i]! - yTrue[i]!;
  }
  const ym = sy / n;
  const bias = se / n;
  let sse = 0;
  let sst = 0;
  let sbe = 0;
  for (let i = 0; i < n; i++) {
    const e = yPred[i]! - yTrue[i]!;
    sse += e * e;
    sst += (yTrue[i]! - ym) ** 2;
    sbe += (e - bias) ** 2;
  }
  return { n, rmsep: Math.sqrt(sse / n), r2: sst > 0 ? 1 - sse / sst : NaN, bias, sep: n > 1 ? Math.sqrt(sbe / (n - 1)) : NaN };
}
