/**
 * Seeded pseudo-random numbers for the simulators: deterministic by seed, no Math.random.
 *
 * - Generator: xoshiro128** 1.1 (Blackman & Vigna, "Scrambled linear pseudorandom number
 *   generators", ACM Trans. Math. Softw. 47(4):36, 2021; reference C code at prng.di.unimi.it).
 * - Seeding: the 128-bit state is filled from a 32-bit seed with SplitMix32 — a Weyl sequence with
 *   increment 0x9E3779B9 (Steele, Lea & Flood, "Fast splittable pseudorandom number generators",
 *   OOPSLA 2014) passed through the MurmurHash3 fmix32 finalizer (Appleby, public domain).
 * - Gaussian draws: Box–Muller transform (Box & Muller 1958, Ann. Math. Stat. 29:610), both
 *   values of each pair used.
 *
 * Independent streams for different purposes are derived with `derive(label)`, so that drawing
 * more numbers in one stream (e.g. a fault's random events) never shifts another (detector noise).
 */

function fmix32(h: number): number {
  h ^= h >>> 16;
  h = Math.imul(h, 0x85ebca6b);
  h ^= h >>> 13;
  h = Math.imul(h, 0xc2b2ae35);
  h ^= h >>> 16;
  return h >>> 0;
}

/** SplitMix32 step: returns [output, next state]. */
function splitmix32(state: number): [number, number] {
  const next = (state + 0x9e3779b9) >>> 0;
  return [fmix32(next), next];
}

/** FNV-1a 32-bit hash of a label (Fowler–Noll–Vo), used to name derived streams. */
export function hashLabel(label: string): number {
  let h = 0x811c9dc5;
  for (let i = 0; i < label.length; i++) {
    h ^= label.charCodeAt(i);
    h = Math.imul(h, 0x01000193);
  }
  return h >>> 0;
}

/** Combine a seed and a label into a new 32-bit seed. */
export function deriveSeed(seed: number, label: string | number): number {
  const l = typeof label === 'number' ? fmix32(label >>> 0) : hashLabel(label);
  return fmix32((fmix32(seed >>> 0) ^ Math.imul(l, 0x9e3779b1)) >>> 0);
}

function rotl(x: number, k: number): number {
  return ((x << k) | (x >>> (32 - k))) >>> 0;
}

export class Rng {
  private s0: number;
  private s1: number;
  private s2: number;
  private s3: number;
  private spare: number | null = null;
  readonly seed: number;

  constructor(seed: number) {
    if (!Number.isFinite(seed)) throw new RangeError(`PRNG seed ${seed} is not a finite number`);
    this.seed = seed >>> 0;
    let st = this.seed;
    let o: number;
    [o, st] = splitmix32(st);
    this.s0 = o;
    [o, st] = splitmix32(st);
    this.s1 = o;
    [o, st] = splitmix32(st);
    this.s2 = o;
    [o, st] = splitmix32(st);
    this.s3 = o;
    if ((this.s0 | this.s1 | this.s2 | this.s3) === 0) this.s0 = 1; // the all-zero state is not allowed
  }

  /** A generator with its 128-bit state given directly (for checks against the reference code). */
  static fromState(s0: number, s1: number, s2: number, s3: number): Rng {
    const r = new Rng(0);
    r.s0 = s0 >>> 0;
    r.s1 = s1 >>> 0;
    r.s2 = s2 >>> 0;
    r.s3 = s3 >>> 0;
    return r;
  }

  /** Next 32-bit unsigned integer (xoshiro128**). */
  nextUint32(): number {
    const result = Math.imul(rotl(Math.imul(this.s1, 5) >>> 0, 7), 9) >>> 0;
    const t = (this.s1 << 9) >>> 0;
    this.s2 = (this.s2 ^ this.s0) >>> 0;
    this.s3 = (this.s3 ^ this.s1) >>> 0;
    this.s1 = (this.s1 ^ this.s2) >>> 0;
    this.s0 = (this.s0 ^ this.s3) >>> 0;
    this.s2 = (this.s2 ^ t) >>> 0;
    this.s3 = rotl(this.s3, 11);
    return result;
  }

  /** Uniform on [0, 1) with 32 random bits. */
  uniform(): number {
    return this.nextUint32() / 4294967296;
  }

  /** Uniform on [lo, hi). */
  between(lo: number, hi: number): number {
    return lo + (hi - lo) * this.uniform();
  }

  /** Standard normal draw (Box–Muller). */
  gauss(): number {
    if (this.spare !== null) {
      const s = this.spare;
      this.spare = null;
      return s;
    }
    // u1 in (0, 1]: avoids log(0).
    const u1 = 1 - this.uniform();
    const u2 = this.uniform();
    const r = Math.sqrt(-2 * Math.log(u1));
    const a = 2 * Math.PI * u2;
    this.spare = r * Math.sin(a);
    return r * Math.cos(a);
  }

  /** Normal draw with mean and standard deviation. */
  normal(mean: number, sd: number): number {
    return mean + sd * this.gauss();
  }

  /** Normal draw truncated to [lo, hi] by clamping (keeps the draw count fixed). */
  normalClamped(mean: number, sd: number, lo: number, hi: number): number {
    return Math.min(hi, Math.max(lo, this.normal(mean, sd)));
  }

  /** A new independent stream named by `label`, derived from this stream's seed. */
  derive(label: string | number): Rng {
    return new Rng(deriveSeed(this.seed, label));
  }
}
