/**
 * Login throttling per user name and per client address, with exponential backoff.
 *
 * After `freeFailures` failed attempts on a key, each further failure locks the key for
 * baseDelayMs · 2^(k−1) (k = failures beyond the free ones), capped at maxDelayMs. Failures are
 * forgotten after `forgetAfterMs` without a failure, and a user's count is cleared by a good
 * login. While a key is locked every attempt is refused without checking the password.
 * (Common practice, cf. NIST SP 800-63B §5.2.2 "rate limiting"; the numbers are our choice.)
 */
import type { LoginFailureRepository } from '../storage/repositories.ts';

export interface ThrottlePolicy {
  userFreeFailures: number;
  addressFreeFailures: number;
  baseDelayMs: number;
  maxDelayMs: number;
  forgetAfterMs: number;
}

export const DEFAULT_THROTTLE: ThrottlePolicy = {
  userFreeFailures: 5,
  addressFreeFailures: 20,
  baseDelayMs: 2_000,
  maxDelayMs: 15 * 60_000,
  forgetAfterMs: 60 * 60_000,
};

export interface ThrottleState {
  key: string;
  failures: number;
  lockedUntil: number;
}

export function userKey(name: string): string {
  return 'user:' + name.toLowerCase();
}
export function addressKey(address: string): string {
  return 'addr:' + address;
}

export class LoginThrottle {
  constructor(
    private readonly repo: LoginFailureRepository,
    readonly policy: ThrottlePolicy = DEFAULT_THROTTLE,
    private readonly now: () => number = Date.now,
  ) {}

  private async state(key: string): Promise<{ failures: number; lockedUntil: number }> {
    const r = await this.repo.get(key);
    if (!r) return { failures: 0, lockedUntil: 0 };
    const t = this.now();
    if (t - r.lastFailureAt > this.policy.forgetAfterMs && r.lockedUntil <= t) return { failures: 0, lockedUntil: 0 };
    return { failures: r.failures, lockedUntil: r.lockedUntil };
  }

  /** ms to wait before the next attempt on any of these keys (0 = allowed now), and which key locks. */
  async check(keys: string[]): Promise<{ waitMs: number; key: string | null }> {
    const t = this.now();
    let worst = { waitMs: 0, key: null as string | null };
    for (const k of keys) {
      const s = await this.state(k);
      const w = s.lockedUntil - t;
      if (w > worst.waitMs) worst = { waitMs: w, key: k };
    }
    return worst;
  }

  private free(key: string): number {
    return key.startsWith('addr:') ? this.policy.addressFreeFailures : this.policy.userFreeFailures;
  }

  /** Count one failure on each key; returns the resulting lock (ms) per key. */
  async fail(keys: string[]): Promise<ThrottleState[]> {
    const t = this.now();
    const out: ThrottleState[] = [];
    for (const k of keys) {
      const s = await this.state(k);
      const failures = s.failures + 1;
      const beyond = failures - this.free(k);
      const lockedUntil = beyond > 0 ? t + Math.min(this.policy.baseDelayMs * 2 ** (beyond - 1), this.policy.maxDelayMs) : 0;
      await this.repo.put(k, { failures, lastFailureAt: t, lockedUntil });
      out.push({ key: k, failures, lockedUntil });
    }
    return out;
  }

  clear(key: string): Promise<void> {
    return this.repo.clear(key);
  }
}
