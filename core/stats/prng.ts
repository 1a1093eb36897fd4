/**
 * Seeded pseudo-random numbers for core (core never calls Math.random).
 * Uniforms: xoshiro128** (Blackman & Vigna 2018, "Scrambled linear pseudorandom number generators"),
 * seeded through splitmix32. Normals: Marsaglia & Bray (1964) polar method.
 */
export interface Prng {
  /** Uniform on [0, 1) with 53 random bits. */
  next(): number;
  /** Standard normal deviate. */
  normal(): number;
}

function splitmix32(seed: number): () => number {
  let s = seed >>> 0;
  return () => {
    s = (s + 0x9e3779b9) >>> 0;
    let z = s;
    z = Math.imul(z ^ (z >>> 16), 0x85ebca6b) >>> 0;
    z = Math.imul(z ^ (z >>> 13), 0xc2b2ae35) >>> 0;
    return (z ^ (z >>> 16)) >>> 0;
  };
}

export function createPrng(seed: number): Prng {
  if (!Number.isFinite(seed)) throw new RangeError(`PRNG seed ${seed} is not a finite number`);
  const sm = splitmix32(Math.floor(seed) >>> 0);
  let a = sm(), b = sm(), c = sm(), d = sm();
  if ((a | b | c | d) === 0) a = 1;
  const u32 = (): number => {
    const r = Math.imul(rotl(Math.imul(b, 5) >>> 0, 7), 9) >>> 0;
    const t = (b << 9) >>> 0;
    c ^= a; d ^= b; b ^= c; a ^= d; c ^= t;
    d = rotl(d, 11);
    return r;
  };
  let spare = 0;
  let hasSpare = false;
  const next = (): number => ((u32() >>> 5) * 67108864 + (u32() >>> 6)) / 9007199254740992;
  return {
    next,
    normal(): number {
      if (hasSpare) { hasSpare = false; return spare; }
      let u: number, v: number, s: number;
      do {
        u = 2 * next() - 1;
        v = 2 * next() - 1;
        s = u * u + v * v;
      } while (s >= 1 || s === 0);
      const f = Math.sqrt((-2 * Math.log(s)) / s);
      spare = v * f;
      hasSpare = true;
      return u * f;
    },
  };
}

function rotl(x: number, k: number): number {
  return ((x << k) | (x >>> (32 - k))) >>> 0;
}
