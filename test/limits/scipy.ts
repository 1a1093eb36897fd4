/** Evaluate a python3 + scipy expression list at test time (scipy 1.17 on these machines). */
import { execFileSync } from 'node:child_process';

export function scipyValues(code: string): number[] {
  const out = execFileSync('python3', ['-c', `import json, numpy as np\nfrom scipy import stats\n${code}`], { encoding: 'utf8', env: { ...process.env, OPENBLAS_NUM_THREADS: '1' } });
  return JSON.parse(out) as number[];
}

/**
 * Several reference computations in one python3 process (scipy.stats' import is the slow part).
 * Each block is python code whose last line is `print(json.dumps(EXPR))`.
 */
export function scipyNamed(blocks: Record<string, string>): Record<string, number[]> {
  const defs = Object.entries(blocks).map(([key, code], i) => {
    const body = code
      .trim()
      .split('\n')
      .map((l) => l.replace(/^print\(json\.dumps\((.*)\)\)\s*$/, 'return $1'))
      .map((l) => '  ' + l)
      .join('\n');
    return `def f${i}():\n${body}\nres[${JSON.stringify(key)}] = f${i}()`;
  });
  const out = execFileSync('python3', ['-c', `import json, numpy as np\nfrom scipy import stats\nres = {}\n${defs.join('\n')}\nprint(json.dumps(res))`], {
    encoding: 'utf8',
    env: { ...process.env, OPENBLAS_NUM_THREADS: '1' },
  });
  return JSON.parse(out) as Record<string, number[]>;
}
