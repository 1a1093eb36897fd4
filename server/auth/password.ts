/**
 * Password hashing with scrypt (Percival & Josefsson, RFC 7914) from node:crypto, a random 16-byte
 * salt per password, 32-byte key. Stored as `scrypt$N$r$p$<salt b64>$<key b64>` so the cost can
 * be raised later without breaking old hashes. Default N = 2^17, r = 8, p = 1: the minimum the
 * OWASP Password Storage Cheat Sheet recommends for scrypt (128 MiB, a few hundred ms per login).
 */
import { randomBytes, scrypt as scryptCb, timingSafeEqual, type ScryptOptions } from 'node:crypto';

export const DEFAULT_SCRYPT_LOG2N = 17;
export const SCRYPT_R = 8;
export const SCRYPT_P = 1;
const KEY_LEN = 32;
const SALT_LEN = 16;
/** Common practice (NIST SP 800-63B asks for at least 8; we ask a little more). */
export const MIN_PASSWORD_LENGTH = 10;
export const MAX_PASSWORD_LENGTH = 256;

/**
 * At most this many scrypt computations run at once (each takes 128·N·r bytes: 128 MiB at the
 * default cost); further ones wait their turn, so a burst of login attempts cannot exhaust memory.
 */
export const MAX_CONCURRENT_SCRYPT = 2;
let running = 0;
const waiting: (() => void)[] = [];

async function withSlot<T>(fn: () => Promise<T>): Promise<T> {
  // A released slot is handed straight to the next waiter, so `running` never exceeds the cap.
  if (running < MAX_CONCURRENT_SCRYPT) running++;
  else await new Promise<void>((r) => waiting.push(r));
  try {
    return await fn();
  } finally {
    const next = waiting.shift();
    if (next) next();
    else running--;
  }
}

/** Largest number of scrypt computations seen running at once (for tests). */
export let peakConcurrentScrypt = 0;

export function scrypt(password: string | Buffer, salt: Buffer, keylen: number, o: { N: number; r: number; p: number }): Promise<Buffer> {
  const opts: ScryptOptions = { N: o.N, r: o.r, p: o.p, maxmem: 256 * o.N * o.r * o.p + 16 * 1024 * 1024 };
  return withSlot(
    () =>
      new Promise<Buffer>((resolve, reject) => {
        peakConcurrentScrypt = Math.max(peakConcurrentScrypt, running);
        scryptCb(password, salt, keylen, opts, (err, key) => (err ? reject(err) : resolve(key)));
      }),
  );
}

export async function hashPassword(password: string, log2N = DEFAULT_SCRYPT_LOG2N): Promise<string> {
  const N = 2 ** log2N;
  const salt = randomBytes(SALT_LEN);
  const key = await scrypt(password.normalize('NFC'), salt, KEY_LEN, { N, r: SCRYPT_R, p: SCRYPT_P });
  return `scrypt$${N}$${SCRYPT_R}$${SCRYPT_P}$${salt.toString('base64')}$${key.toString('base64')}`;
}

interface Parsed {
  N: number;
  r: number;
  p: number;
  salt: Buffer;
  key: Buffer;
}

export function parsePasswordHash(stored: string): Parsed {
  const parts = stored.split('$');
  if (parts.length !== 6 || parts[0] !== 'scrypt') throw new Error('stored password hash is not in the scrypt$N$r$p$salt$key form');
  const [N, r, p] = parts.slice(1, 4).map(Number);
  if (![N, r, p].every((x) => Number.isInteger(x) && x > 0)) throw new Error('stored password hash has bad scrypt parameters');
  return { N, r, p, salt: Buffer.from(parts[4], 'base64'), key: Buffer.from(parts[5], 'base64') };
}

/** Constant-time comparison of the derived key. */
export async function verifyPassword(password: string, stored: string): Promise<boolean> {
  const h = parsePasswordHash(stored);
  const key = await scrypt(password.normalize('NFC'), h.salt, h.key.length, h);
  return key.length === h.key.length && timingSafeEqual(key, h.key);
}

/** True when the stored hash is cheaper than the configured cost (rehash after a good login). */
export function needsRehash(stored: string, log2N: number): boolean {
  try {
    const h = parsePasswordHash(stored);
    return h.N < 2 ** log2N || h.r !== SCRYPT_R;
  } catch {
    return true;
  }
}

/** Problems with a new password, or null when acceptable. */
export function passwordProblem(pw: unknown): string | null {
  if (typeof pw !== 'string') return 'password must be a string';
  if ([...pw].length < MIN_PASSWORD_LENGTH) return `password must have at least ${MIN_PASSWORD_LENGTH} characters`;
  if (pw.length > MAX_PASSWORD_LENGTH) return `password must have at most ${MAX_PASSWORD_LENGTH} characters`;
  return null;
}

/** A random password of `length` characters from an alphabet without look-alikes (0/O, 1/l/I). */
export function generatePassword(length = 20): string {
  const alphabet = 'abcdefghijkmnopqrstuvwxyzABCDEFGHJKLMNPQRSTUVWXYZ23456789';
  const out: string[] = [];
  // Rejection sampling keeps the choice uniform.
  while (out.length < length) {
    for (const b of randomBytes(length * 2)) {
      if (b < 256 - (256 % alphabet.length) && out.length < length) out.push(alphabet[b % alphabet.length]);
    }
  }
  return out.join('');
}
