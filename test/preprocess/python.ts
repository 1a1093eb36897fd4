/**
 * Run a python3 snippet (numpy/scipy) as the reference implementation in a test. The snippet
 * reads JSON from `inp` and must assign the JSON-able result to `out`.
 */
import { spawnSync } from 'node:child_process';

const probe = spawnSync('python3', ['-c', 'import numpy, scipy; print(numpy.__version__, scipy.__version__)'], { encoding: 'utf8' });
export const pythonAvailable = probe.status === 0;
export const pythonVersions = pythonAvailable ? probe.stdout.trim() : 'python3 with numpy/scipy not found';
if (!pythonAvailable) console.warn(`SKIPPED reference checks against numpy/scipy: ${pythonVersions}`);

export function runPython<T = unknown>(code: string, input: unknown): T {
  const wrapped = `import json, sys\nimport numpy as np\ninp = json.loads(sys.stdin.read())\n${code}\nsys.stdout.write(json.dumps(out))\n`;
  const r = spawnSync('python3', ['-c', wrapped], { input: JSON.stringify(input), encoding: 'utf8', maxBuffer: 256 * 1024 * 1024 });
  if (r.status !== 0) throw new Error(`python3 failed (${r.status}): ${r.stderr}`);
  return JSON.parse(r.stdout) as T;
}

/** Deterministic uniform [0, 1) generator (mulberry32) for test data. */
export function seededRandom(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

export function maxAbsDiff(a: ArrayLike<number>, b: ArrayLike<number>): number {
  if (a.length !== b.length) throw new Error(`length ${a.length} vs ${b.length}`);
  let m = 0;
  for (let i = 0; i < a.length; i++) m = Math.max(m, Math.abs(a[i]! - b[i]!));
  return m;
}
