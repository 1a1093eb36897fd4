/** The demo's own --help (npm start -- --help): its options and how time works, exit 0, nothing started. */
import { spawnSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';

describe('demo --help', () => {
  it('prints its options, the time note and the caution, and exits 0 without starting a server', () => {
    const r = spawnSync(process.execPath, ['--import', 'tsx', 'scripts/demo.ts', '--help'], { encoding: 'utf8', timeout: 60_000 });
    expect(r.status).toBe(0);
    for (const s of ['--speed N', '--history-days N', '--seed N', 'nothing is dated in the future', 'Tideline advises']) expect(r.stdout).toContain(s);
    expect(r.stdout).not.toMatch(/listening on/);
  }, 60_000);
});
