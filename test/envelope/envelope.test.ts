import { describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { movingBlockSd, MovingBlockSd } from '../../core/envelope/mbsd.ts';
import { sdBand, predictionBand } from '../../core/envelope/band.ts';
import { buildEnvelope, type ReferenceTrajectory } from '../../core/envelope/envelope.ts';
import { momentLimit } from '../../core/envelope/moment-limit.ts';
import { progressOf } from '../../core/envelope/progress.ts';

const MBSD_SPECTRA = [[1, 2, 3], [1.2, 2.1, 2.9], [0.9, 1.8, 3.2], [1, 2, 3], [1.01, 2, 3], [1, 1.99, 3.01]];

describe('moving-block standard deviation (Sekulic et al. 1996; worked case in docs/check-values.md)', () => {
  it('matches the worked case, n = 3, n−1 denominator', () => {
    const r = movingBlockSd(MBSD_SPECTRA, 3);
    const want = [0.152753, 0.152753, 0.097256, 0.005774];
    expect(r.length).toBe(4);
    want.forEach((w, i) => expect(Math.abs(r[i] - w)).toBeLessThan(5e-7));
  });
  it('the streaming form gives the same values and null before the first full block', () => {
    const m = new MovingBlockSd(3, 3);
    const batch = movingBlockSd(MBSD_SPECTRA, 3);
    const got = MBSD_SPECTRA.map((s) => m.push(s));
    expect(got.slice(0, 2)).toEqual([null, null]);
    got.slice(2).forEach((v, i) => expect(v).toBeCloseTo(batch[i], 14));
  });
  it('rejects a block below 2', () => {
    expect(() => movingBlockSd(MBSD_SPECTRA, 1)).toThrow(/block/);
  });
});

describe('envelope band at one progress point (docs/check-values.md; Nomikos & MacGregor 1995)', () => {
  const t = [0.9, 1.1, 1.0, 1.3, 0.7];
  it('mean ± 3s', () => {
    const b = sdBand(t, 3);
    expect(b.mean).toBeCloseTo(1, 12);
    expect(b.sd).toBeCloseTo(0.223607, 6);
    expect(b.lower).toBeCloseTo(0.3292, 4);
    expect(b.upper).toBeCloseTo(1.6708, 4);
  });
  it('95 % prediction interval with t from scipy (run at test time)', () => {
    const py = 'from scipy.stats import t; import numpy as np; x=np.array([0.9,1.1,1.0,1.3,0.7]); n=len(x); q=t.ppf(0.975,n-1); h=q*x.std(ddof=1)*np.sqrt(1+1/n); print(q, x.mean()-h, x.mean()+h)';
    const [q, lo, hi] = execFileSync('python3', ['-c', py]).toString().trim().split(/\s+/).map(Number);
    const b = predictionBand(t, 0.95);
    expect(b.t).toBeCloseTo(q, 8);
    expect(b.lower).toBeCloseTo(lo, 8);
    expect(b.upper).toBeCloseTo(hi, 8);
    // values printed in docs/check-values.md
    expect(b.lower).toBeCloseTo(0.3199, 4);
    expect(b.upper).toBeCloseTo(1.6801, 4);
    expect(b.t).toBeCloseTo(2.7764, 4);
  });
});

describe('moment-matched limit g·χ²_h (Box 1954; Nomikos & MacGregor 1995; docs/check-values.md)', () => {
  const Q = [0.52, 0.61, 0.48, 0.75, 0.90, 0.40, 0.66, 0.58, 0.71, 0.55];
  it('matches the worked values', () => {
    expect(momentLimit(Q, 0.95)).toBeCloseTo(0.872433, 5);
    expect(momentLimit(Q, 0.99)).toBeCloseTo(1.002710, 5);
  });
});

function traj(n: number, f: (i: number) => number[], shift = 0): ReferenceTrajectory {
  const elapsed = Array.from({ length: n }, (_, i) => i);
  const sc = Array.from({ length: 2 }, (_, a) => Float64Array.from({ length: n }, (_, i) => f(i)[a] + shift));
  return { elapsedMin: elapsed, progress: elapsed, scores: sc, t2: Float64Array.from({ length: n }, (_, i) => 1 + 0.1 * Math.sin(i + shift)), q: Float64Array.from({ length: n }, (_, i) => 0.5 + 0.05 * Math.cos(i * 3 + shift)), endIndex: n - 5 };
}

describe('envelope builder', () => {
  const opts = { k: 3, smoothing: 2, points: 30, confidence: 0.99, globalT2Limit: 10, globalQLimit: 1 };
  const axis = { kind: 'time' as const, sign: 1 as const, alpha: 1 };
  it('identical batches give a band of zero width', () => {
    const refs = [0, 1, 2, 3].map(() => traj(40, (i) => [Math.sin(i / 5), i / 10]));
    const env = buildEnvelope(refs, axis, opts);
    for (const pc of env.pcs) {
      pc.sd.forEach((s) => expect(s).toBe(0));
      pc.lower.forEach((l, k) => expect(l).toBe(pc.upper[k]));
    }
  });
  it('batches offset by constants give the per-point mean and sd of the offsets', () => {
    const offs = [-0.2, 0, 0.1, 0.3];
    const refs = offs.map((o) => traj(40, (i) => [i / 10, -i / 20], o));
    const env = buildEnvelope(refs, axis, { ...opts, smoothing: 0 });
    const b = sdBand(offs, 3);
    const k = 10;
    expect(env.pcs[0].mean[k] - env.grid[k] / 10).toBeCloseTo(b.mean, 10);
    expect(env.pcs[0].sd[k]).toBeCloseTo(b.sd, 10);
    expect(env.pcs[0].upper[k] - env.pcs[0].mean[k]).toBeCloseTo(3 * b.sd, 10);
    expect(env.endMin.every((m) => m === 35)).toBe(true);
  });
  it('indicator progress is monotonic and lines up batches of unequal length', () => {
    const ind = [0, 1, 3, 2, 5, 4, 6];
    const p = progressOf({ kind: 'indicator', source: 'pc1', sign: 1, alpha: 1 }, [0, 1, 2, 3, 4, 5, 6], ind);
    expect(Array.from(p)).toEqual([0, 1, 3, 3, 5, 5, 6]);
    // Two batches with the same path at different speeds: on the indicator axis the band is zero.
    const mk = (n: number): ReferenceTrajectory => {
      const pr = Float64Array.from({ length: n }, (_, i) => (10 * i) / (n - 1));
      return { elapsedMin: Float64Array.from({ length: n }, (_, i) => i), progress: pr, scores: [pr, Float64Array.from(pr, (x) => x * x)], t2: Float64Array.from(pr, () => 1), q: Float64Array.from(pr, () => 1), endIndex: n - 1 };
    };
    const env = buildEnvelope([mk(21), mk(41), mk(81)], { kind: 'indicator', source: 'pc1', sign: 1, alpha: 1 }, { ...opts, smoothing: 0, points: 11 });
    env.pcs[0].sd.forEach((s) => expect(s).toBeLessThan(1e-12));
    env.pcs[1].sd.forEach((s, k) => expect(s).toBeLessThan(0.3 + 1e-9 * k)); // interpolation of x² only
    expect(env.endMin).toEqual([20, 40, 80]);
  });
  it('names bad settings', () => {
    const refs = [traj(20, (i) => [i, i]), traj(20, (i) => [i, i])];
    expect(() => buildEnvelope(refs.slice(0, 1), axis, opts)).toThrow(/at least 2/);
    expect(() => buildEnvelope(refs, axis, { ...opts, points: 1 })).toThrow(/points/);
    expect(() => buildEnvelope(refs, axis, { ...opts, k: 0 })).toThrow(/k must/);
  });
});
