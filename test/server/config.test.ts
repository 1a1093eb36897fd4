import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { ConfigError, loadConfig } from '../../server/config.ts';

describe('configuration: defaults < file < environment < flags, validated', () => {
  const dir = mkdtempSync(join(tmpdir(), 'tideline-cfg-'));
  const file = join(dir, 'c.json');
  writeFileSync(file, JSON.stringify({ port: 1000, dataDir: '/from/file', ingest: { staleAfterMs: 7000 } }));

  it('takes defaults', () => {
    const c = loadConfig();
    expect(c).toMatchObject({ port: 8470, synchronous: 'FULL', ingest: { groupCommitMs: 2, staleAfterMs: 60000 } });
  });
  it('layers file, environment and flags in that order', () => {
    const c = loadConfig({ env: { TIDELINE_CONFIG: file, TIDELINE_PORT: '2000' }, flags: { dataDir: '/from/flag' } });
    expect(c).toMatchObject({ port: 2000, dataDir: '/from/flag', ingest: { staleAfterMs: 7000, groupCommitMs: 2 } });
    const d = loadConfig({ env: { TIDELINE_CONFIG: file }, flags: { port: '3000', 'ingest.staleAfterMs': '500' } });
    expect(d).toMatchObject({ port: 3000, ingest: { staleAfterMs: 500 } });
  });
  it('names the setting and its source when a value is wrong', () => {
    expect(() => loadConfig({ flags: { port: 'http' } })).toThrow(/flag --port: port must be a number, got "http"/);
    expect(() => loadConfig({ env: { TIDELINE_PORT: '70000' } })).toThrow(/port: Too big/);
    expect(() => loadConfig({ flags: { synchronous: 'OFF' } })).toThrow(/synchronous/);
    expect(() => loadConfig({ flags: { nonsense: '1' } })).toThrow(/nonsense/);
    writeFileSync(join(dir, 'bad.json'), '{"port": ');
    expect(() => loadConfig({ flags: { config: join(dir, 'bad.json') } })).toThrow(/not valid JSON/);
    expect(() => loadConfig({ flags: { config: join(dir, 'missing.json') } })).toThrow(ConfigError);
  });
});
