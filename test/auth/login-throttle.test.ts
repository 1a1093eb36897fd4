import { describe, expect, it } from 'vitest';
import { LoginThrottle, addressKey, userKey } from '../../server/auth/login-throttle.ts';
import { openTestDb } from '../audit/db-fixture.ts';

function make() {
  const { storage } = openTestDb();
  const clock = { t: 1_000_000 };
  const th = new LoginThrottle(storage.loginFailures, { userFreeFailures: 3, addressFreeFailures: 5, baseDelayMs: 1000, maxDelayMs: 8000, forgetAfterMs: 3_600_000 }, () => clock.t);
  return { th, clock };
}

describe('login throttle', () => {
  it('allows the free failures, then locks with doubling delays up to the cap', async () => {
    const { th, clock } = make();
    const keys = [userKey('Alice')];
    for (let i = 0; i < 3; i++) {
      expect((await th.check(keys)).waitMs).toBe(0);
      await th.fail(keys);
    }
    expect((await th.check(keys)).waitMs).toBe(0); // 3 failures: still free
    const delays: number[] = [];
    for (let i = 0; i < 6; i++) {
      const [s] = await th.fail(keys);
      delays.push(s.lockedUntil - clock.t);
      expect(await th.check(keys)).toEqual({ waitMs: s.lockedUntil - clock.t, key: 'user:alice' });
      clock.t = s.lockedUntil; // wait it out
      expect((await th.check(keys)).waitMs).toBe(0);
    }
    expect(delays).toEqual([1000, 2000, 4000, 8000, 8000, 8000]);
  });

  it('keys user names case-insensitively and clears on success', async () => {
    const { th } = make();
    for (let i = 0; i < 4; i++) await th.fail([userKey('BOB')]);
    expect((await th.check([userKey('bob')])).waitMs).toBe(1000);
    await th.clear(userKey('bob'));
    expect((await th.check([userKey('Bob')])).waitMs).toBe(0);
  });

  it('counts per address separately, with its own allowance', async () => {
    const { th } = make();
    for (let i = 0; i < 5; i++) await th.fail([userKey(`u${i}`), addressKey('10.0.0.9')]);
    expect((await th.check([userKey('new'), addressKey('10.0.0.9')])).waitMs).toBe(0);
    await th.fail([userKey('u9'), addressKey('10.0.0.9')]);
    expect(await th.check([userKey('anyone'), addressKey('10.0.0.9')])).toEqual({ waitMs: 1000, key: 'addr:10.0.0.9' });
    expect((await th.check([userKey('anyone'), addressKey('10.0.0.10')])).waitMs).toBe(0);
  });

  it('forgets old failures', async () => {
    const { th, clock } = make();
    for (let i = 0; i < 3; i++) await th.fail([userKey('c')]);
    clock.t += 3_600_001;
    const [s] = await th.fail([userKey('c')]);
    expect(s.failures).toBe(1);
    expect(s.lockedUntil).toBe(0);
  });
});
