import { describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { dtw, alignToReference } from '../../core/align/dtw.ts';

// Reference: a plain O(nm) implementation of the Sakoe & Chiba (1978) symmetric recurrence in
// python3 (written here, independent of the TypeScript loop structure), run at test time.
const PY = String.raw`
import json, sys, math
cases = json.load(sys.stdin)
out = []
for c in cases:
    a, b, band = c['a'], c['b'], c['band']
    n, m = len(a), len(b)
    INF = float('inf')
    def d(i, j):
        return sum((x - y) ** 2 for x, y in zip(a[i], b[j]))
    def ok(i, j):
        if band is None: return True
        centre = i * (m - 1) / (n - 1) if n > 1 else 0
        return abs(j - centre) <= band + 1e-9
    g = [[INF] * m for _ in range(n)]
    for i in range(n):
        for j in range(m):
            if not ok(i, j): continue
            if i == 0 and j == 0:
                g[0][0] = 2 * d(0, 0); continue
            cand = []
            if i > 0 and j > 0: cand.append(g[i-1][j-1] + 2 * d(i, j))
            if i > 0: cand.append(g[i-1][j] + d(i, j))
            if j > 0: cand.append(g[i][j-1] + d(i, j))
            g[i][j] = min(cand)
    # backtrack with the same preference order (diagonal, vertical, horizontal)
    i, j = n - 1, m - 1
    path = [[i, j]]
    while i > 0 or j > 0:
        best = None
        for (di, dj, wgt) in ((1, 1, 2), (1, 0, 1), (0, 1, 1)):
            pi, pj = i - di, j - dj
            if pi < 0 or pj < 0: continue
            v = g[pi][pj] + wgt * d(i, j)
            if best is None or v < best[0] - 1e-12: best = (v, pi, pj)
        i, j = best[1], best[2]
        path.append([i, j])
    out.append({'cost': g[n-1][m-1], 'path': path[::-1]})
print(json.dumps(out))
`;

function lcg(seed: number): () => number {
  let s = seed >>> 0;
  return () => ((s = (Math.imul(s, 1664525) + 1013904223) >>> 0) / 2 ** 32);
}

describe('DTW (Sakoe & Chiba 1978 symmetric, with band)', () => {
  it('matches a hand-worked example', () => {
    // a = [1,2,3], b = [1,3], squared distance. g(0,0)=0, g(1,0)=1, g(0,1)=4, g(1,1)=2,
    // g(2,0)=5, g(2,1)=min(2+0, 1+2·0, 5+0)=1 → cost 1, normalised 1/(3+2) = 0.2,
    // path (0,0) (1,0) (2,1) — worked by hand.
    const r = dtw([1, 2, 3], [1, 3]);
    expect(r.cost).toBe(1);
    expect(r.distance).toBeCloseTo(0.2, 15);
    expect(r.path).toEqual([[0, 0], [1, 0], [2, 1]]);
  });

  it('is zero for identical sequences and follows the diagonal', () => {
    const r = dtw([[1, 2], [3, 4], [5, 6]], [[1, 2], [3, 4], [5, 6]], { band: 0 });
    expect(r.cost).toBe(0);
    expect(r.path).toEqual([[0, 0], [1, 1], [2, 2]]);
  });

  it('agrees with an independent python implementation on random cases, with and without band', () => {
    const rnd = lcg(42);
    const cases: { a: number[][]; b: number[][]; band: number | null }[] = [];
    for (let c = 0; c < 12; c++) {
      const n = 5 + Math.floor(rnd() * 25);
      const m = 5 + Math.floor(rnd() * 25);
      const dim = 1 + Math.floor(rnd() * 3);
      const mk = (k: number) => Array.from({ length: k }, () => Array.from({ length: dim }, () => rnd() * 4 - 2));
      cases.push({ a: mk(n), b: mk(m), band: c % 3 === 0 ? null : 1 + Math.floor(rnd() * 6) });
    }
    const ref = JSON.parse(execFileSync('python3', ['-c', PY], { input: JSON.stringify(cases) }).toString()) as { cost: number; path: number[][] }[];
    cases.forEach((c, k) => {
      const r = dtw(c.a, c.b, { band: c.band ?? Infinity });
      expect(r.cost).toBeCloseTo(ref[k].cost, 10);
      expect(r.path).toEqual(ref[k].path);
    });
  });

  it('a narrower band never lowers the cost (constraint only removes paths)', () => {
    const rnd = lcg(7);
    const a = Array.from({ length: 30 }, () => [rnd()]);
    const b = Array.from({ length: 25 }, () => [rnd()]);
    expect(dtw(a, b, { band: 2 }).cost).toBeGreaterThanOrEqual(dtw(a, b).cost - 1e-12);
  });

  it('names bad input', () => {
    expect(() => dtw([], [1])).toThrow(/non-empty/);
    expect(() => dtw([[1, 2]], [[1]])).toThrow(/values, expected 2/);
    expect(() => dtw([1], [1], { band: -1 })).toThrow(/band/);
  });

  it('aligns a time-stretched copy onto the reference axis', () => {
    const ref = [0, 1, 2, 3, 4];
    const slow = [0, 0, 1, 1, 2, 2, 3, 3, 4, 4];
    const r = dtw(slow, ref, { band: 5 });
    expect(r.cost).toBe(0);
    const al = alignToReference(slow, r.path, ref.length);
    expect(al.map((x) => x[0])).toEqual(ref);
  });
});
