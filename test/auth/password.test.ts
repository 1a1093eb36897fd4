import { describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { generatePassword, hashPassword, needsRehash, parsePasswordHash, passwordProblem, scrypt, verifyPassword } from '../../server/auth/password.ts';

describe('scrypt password hashing', () => {
  it('matches the RFC 7914 §12 test vector (P="password", S="NaCl", N=1024, r=8, p=16, dkLen=64)', async () => {
    // RFC 7914, section 12, second vector (copied from the RFC text).
    const expected =
      'fdbabe1c9d3472007856e7190d01e9fe7c6ad7cbc8237830e77376634b3731622eaf30d92e22a3886ff109279d9830dac727afb94a83ee6d8360cbdfa2cc0640';
    const key = await scrypt('password', Buffer.from('NaCl'), 64, { N: 1024, r: 8, p: 16 });
    expect(key.toString('hex')).toBe(expected);
  });

  it('agrees with Python hashlib.scrypt on a stored hash', async () => {
    const stored = await hashPassword('correct horse battery', 12);
    const h = parsePasswordHash(stored);
    const py = `import hashlib,base64,sys; s=base64.b64decode(sys.argv[1]); print(hashlib.scrypt(b"correct horse battery", salt=s, n=${h.N}, r=${h.r}, p=${h.p}, dklen=32).hex())`;
    const out = execFileSync('python3', ['-c', py, h.salt.toString('base64')], { encoding: 'utf8' }).trim();
    expect(out).toBe(h.key.toString('hex'));
  });

  it('verifies the right password, refuses a wrong one, salts each hash', async () => {
    const a = await hashPassword('s3cret-enough', 12);
    const b = await hashPassword('s3cret-enough', 12);
    expect(a).not.toBe(b);
    expect(a).toMatch(/^scrypt\$4096\$8\$1\$/);
    expect(await verifyPassword('s3cret-enough', a)).toBe(true);
    expect(await verifyPassword('s3cret-enougH', a)).toBe(false);
    expect(await verifyPassword('', a)).toBe(false);
  });

  it('asks for a rehash when the stored cost is below the configured one', async () => {
    const a = await hashPassword('s3cret-enough', 12);
    expect(needsRehash(a, 12)).toBe(false);
    expect(needsRehash(a, 14)).toBe(true);
    expect(() => parsePasswordHash('md5$abc')).toThrow(/scrypt/);
  });

  it('password rules and generated passwords', () => {
    expect(passwordProblem('short')).toMatch(/at least 10/);
    expect(passwordProblem(42)).toMatch(/string/);
    expect(passwordProblem('long enough pass')).toBeNull();
    const p = generatePassword(20);
    expect(p).toHaveLength(20);
    expect(p).toMatch(/^[a-km-zA-HJ-NP-Z2-9]+$/);
    expect(generatePassword(20)).not.toBe(p);
  });
});

describe('scrypt concurrency', () => {
  it('runs at most MAX_CONCURRENT_SCRYPT computations at once, and all finish correctly', async () => {
    const mod = await import('../../server/auth/password.ts');
    const stored = await mod.hashPassword('burst-password-1', 10);
    const results = await Promise.all(Array.from({ length: 12 }, (_, i) => mod.verifyPassword(i % 3 ? 'burst-password-1' : 'wrong-password', stored)));
    expect(results.filter(Boolean)).toHaveLength(8);
    expect(mod.peakConcurrentScrypt).toBeGreaterThan(0);
    expect(mod.peakConcurrentScrypt).toBeLessThanOrEqual(mod.MAX_CONCURRENT_SCRYPT);
  });
});
