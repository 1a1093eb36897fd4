/**
 * How many components (PLS latent variables, PCA components) a model keeps: the one-standard-error
 * rule of Hastie, Tibshirani & Friedman (2009, The Elements of Statistical Learning, 2nd ed.,
 * §7.10.1 and Fig. 7.9 — section from the book, page not quoted): "choose the most parsimonious
 * model whose error is no more than one standard error above the error of the best model", the
 * standard error being that of the K cross-validation fold errors, sd(fold errors)/√K. A count at
 * the top of the search range is said to be there: the search may have stopped too early, or the
 * model may be fitting what only the calibration data have.
 */

export interface ParsimonyChoice {
  /** The count chosen (1-based). */
  chosen: number;
  /** The count of least cross-validated error (1-based). */
  best: number;
  /** Largest count searched. */
  searched: number;
  /** Standard error of the cross-validated error at the best count: sd over the folds / √K. */
  se: number;
  /** cvError[best − 1] + se: the chosen count is the fewest at or below it. */
  threshold: number;
  /** The best count is the largest searched. */
  bestAtLimit: boolean;
  /** The chosen count is the largest searched. */
  atLimit: boolean;
  /** The rule and what it found, in words. */
  text: string;
}

/**
 * cvError[a − 1]: the cross-validated error with a components (the figure to minimise, e.g. mean
 * squared error); foldErrors[a − 1][k]: the same error on fold k alone. `unit` names the count in
 * the text ('LV', 'PC'); `describe(a)` gives the error at a in the user's units for the text.
 */
export function oneStandardErrorRule(cvError: ArrayLike<number>, foldErrors: ArrayLike<number>[], unit: string, describe: (a: number) => string = (a) => cvError[a - 1]!.toPrecision(4)): ParsimonyChoice {
  const A = cvError.length;
  if (A < 1) throw new RangeError('one-standard-error rule: no component count was searched');
  if (foldErrors.length !== A) throw new RangeError(`one-standard-error rule: ${foldErrors.length} rows of fold errors for ${A} counts`);
  for (let a = 0; a < A; a++) if (!Number.isFinite(cvError[a]!)) throw new RangeError(`one-standard-error rule: the error at ${a + 1} ${unit} is ${cvError[a]}`);
  let best = 0;
  for (let a = 1; a < A; a++) if (cvError[a]! < cvError[best]!) best = a;
  const f = foldErrors[best]!;
  const K = f.length;
  if (K < 2) throw new RangeError(`one-standard-error rule: needs at least 2 folds, got ${K}`);
  let m = 0;
  for (let k = 0; k < K; k++) m += f[k]!;
  m /= K;
  let ss = 0;
  for (let k = 0; k < K; k++) ss += (f[k]! - m) ** 2;
  const se = Math.sqrt(ss / (K - 1)) / Math.sqrt(K);
  const threshold = cvError[best]! + se;
  let chosen = best + 1;
  for (let a = 0; a <= best; a++) {
    if (cvError[a]! <= threshold) {
      chosen = a + 1;
      break;
    }
  }
  const bestAtLimit = best + 1 === A;
  const atLimit = chosen === A;
  let text =
    `one-standard-error rule (Hastie, Tibshirani & Friedman 2009, The Elements of Statistical Learning §7.10): ` +
    `least cross-validated error at ${best + 1} ${unit} (${describe(best + 1)}); the fewest within one standard error of it ` +
    `(sd of the ${K} fold errors / √${K}): ${chosen} ${unit} (${describe(chosen)}); searched 1…${A}`;
  if (atLimit) text += `. The choice is the largest count searched (${A}): more ${unit} might predict better, or the model fits what only the calibration data have — check the evidence before relying on it`;
  else if (bestAtLimit) text += `. The least error is at the largest count searched (${A}); the rule chose fewer`;
  return { chosen, best: best + 1, searched: A, se, threshold, bestAtLimit, atLimit, text };
}
