import { describe, expect, it } from 'vitest';
import { LoginThrottle, addressKey, userKey } from '../../server/auth/login-throttle.ts';
import { openTestDb } from '../audit/db-fixture.ts';

function make() {
  const { db } = openTestDb();
  const clock = { t: 1_000_000 };
  const th = new LoginThrottle(db, { userFreeFailures: 3, addressFreeFailures: 5, baseDelayMs: 1000, maxDelayMs: 8000, forgetAfterMs: 3_600_000 }, () => clock.t);
  return { th, clock };
}

describe('login throttle', () => {
  it('allows the free failures, then locks with doubling delays up to the cap', () => {
    const { th, clock } = make();
    const keys = [userKey('Alice')];
    for (let i = 0; i < 3; i++) {
      expect(th.check(keys).waitMs).toBe(0);
      th.fail(keys);
    }
    expect(th.check(keys).waitMs).toBe(0); // 3 failures: still free
    const delays: number[] = [];
    for (let i = 0; i < 6; i++) {
      const [s] = th.fail(keys);
      delays.push(s.lockedUntil - clock.t);
      expect(th.check(keys)).toEqual({ waitMs: s.lockedUntil - clock.t, key: 'user:alice' });
      clock.t = s.lockedUntil; // wait it out
      expect(th.check(keys).waitMs).toBe(0);
    }
    expect(delays).toEqual([1000, 2000, 4000, 8000, 8000, 8000]);
  });

  it('keys user names case-insensitively and clears on success', () => {
    const { th } = make();
    for (let i = 0; i < 4; i++) th.fail([userKey('BOB')]);
    expect(th.check([userKey('bob')]).waitMs).toBe(1000);
    th.clear(userKey('bob'));
    expect(th.check([userKey('Bob')]).waitMs).toBe(0);
  });

  it('counts per address separately, with its own allowance', () => {
    const { th } = make();
    for (let i = 0; i < 5; i++) th.fail([userKey(`u${i}`), addressKey('10.0.0.9')]);
    expect(th.check([userKey('new'), addressKey('10.0.0.9')]).waitMs).toBe(0);
    th.fail([userKey('u9'), addressKey('10.0.0.9')]);
    expect(th.check([userKey('anyone'), addressKey('10.0.0.9')])).toEqual({ waitMs: 1000, key: 'addr:10.0.0.9' });
    expect(th.check([userKey('anyone'), addressKey('10.0.0.10')]).waitMs).toBe(0);
  });

  it('forgets old failures', () => {
    const { th, clock } = make();
    for (let i = 0; i < 3; i++) th.fail([userKey('c')]);
    clock.t += 3_600_001;
    const [s] = th.fail([userKey('c')]);
    expect(s.failures).toBe(1);
    expect(s.lockedUntil).toBe(0);
  });
});
