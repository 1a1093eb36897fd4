/** Run a python3 snippet with JSON on stdin; returns its JSON stdout. Used for checks against numpy/scipy. */
import { spawnSync } from 'node:child_process';

export function runPython<T>(code: string, input: unknown): T {
  const r = spawnSync('python3', ['-c', code], { input: JSON.stringify(input), encoding: 'utf8', maxBuffer: 256 * 1024 * 1024 });
  if (r.error) throw r.error;
  if (r.status !== 0) throw new Error(`python3 failed (${r.status}): ${r.stderr}`);
  return JSON.parse(r.stdout) as T;
}
