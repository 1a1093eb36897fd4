/**
 * Retry delays: exponential backoff with jitter, "equal jitter" variant — half the exponential
 * delay fixed, half random (M. Brooker, "Exponential Backoff And Jitter", AWS Architecture Blog,
 * 2015). The fixed half keeps a dead receiver from being hammered; the random half spreads the
 * retries of many senders.
 */
export interface BackoffPolicy {
  /** Delay before the 2nd attempt, ms (before jitter). */
  baseMs: number;
  /** Upper bound on any delay, ms. */
  capMs: number;
}

export const DEFAULT_BACKOFF: BackoffPolicy = { baseMs: 1000, capMs: 5 * 60_000 };

/** Delay after `attempts` failed attempts (1 = the first failure). `random` returns [0, 1). */
export function backoffDelay(attempts: number, policy: BackoffPolicy, random: () => number = Math.random): number {
  if (!Number.isInteger(attempts) || attempts < 1) throw new Error(`attempts must be an integer ≥ 1, got ${attempts}`);
  const exp = Math.min(policy.capMs, policy.baseMs * 2 ** Math.min(attempts - 1, 52));
  return Math.round(exp / 2 + random() * (exp / 2));
}
