/** Evaluate a python3 + scipy expression list at test time (scipy 1.17 on these machines). */
import { execFileSync } from 'node:child_process';

export function scipyValues(code: string): number[] {
  const out = execFileSync('python3', ['-c', `import json, numpy as np\nfrom scipy import stats\n${code}`], { encoding: 'utf8', env: { ...process.env, OPENBLAS_NUM_THREADS: '1' } });
  return JSON.parse(out) as number[];
}
