import { spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, writeFileSync, mkdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { readBatchJcamp } from '../../core/io/batch-jcamp.ts';

const cli = (args: string[]) => spawnSync(process.execPath, ['--import', 'tsx', 'server/cli.ts', ...args], { encoding: 'utf8' });

describe('tideline import / export on the command line', () => {
  it('imports a folder in one transaction, refuses a bad folder whole, and exports JCAMP-DX', () => {
    const d = mkdtempSync(join(tmpdir(), 'tideline-cli-'));
    const data = ['--data-dir', d];
    expect(cli(['unit', 'add', 'dryer-9', '--kind', 'dryer', ...data]).status).toBe(0);
    mkdirSync(join(d, 'good'));
    writeFileSync(join(d, 'good', 'a.csv'), 'batch,time_s,1000,1010\nH-1,0,1,2\nH-1,10,1.5,2.5\n');
    writeFileSync(join(d, 'good', 'b.csv'), 'batch;time_s;1000;1010\nH-2;0;1,25;2\n');
    let r = cli(['import', '--unit', 'dryer-9', '--product', 'granule', ...data, join(d, 'good')]);
    expect(r.stdout + r.stderr).toMatch(/imported H-1: 2 spectra from a\.csv[\s\S]*imported H-2: 1 spectra from b\.csv/);
    expect(r.status).toBe(0);
    mkdirSync(join(d, 'bad'));
    writeFileSync(join(d, 'bad', 'a.csv'), 'batch,time_s,1000,1010\nH-3,0,1,2\n');
    writeFileSync(join(d, 'bad', 'b.csv'), 'batch,time_s,1000,1010\nH-4,0,1\n');
    r = cli(['import', '--unit', 'dryer-9', '--product', 'granule', ...data, join(d, 'bad')]);
    expect(r.status).toBe(3);
    expect(r.stdout).toMatch(/nothing was imported: b\.csv, line 2: 3 fields, but the header has 4/);
    r = cli(['export', 'H-3', '--format', 'csv', ...data]);
    expect(r.status).toBe(2);
    expect(r.stderr).toMatch(/batch "H-3" does not exist/);
    r = cli(['export', 'H-2', '--format', 'jcamp', '--out', join(d, 'h2.jdx'), ...data]);
    expect(r.status).toBe(0);
    const [b] = readBatchJcamp(readFileSync(join(d, 'h2.jdx'), 'utf8'));
    expect(Array.from(b!.spectra[0]!)).toEqual([1.25, 2]);
  }, 240_000);
});
