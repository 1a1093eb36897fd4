import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { ConfigError, loadConfig } from '../../server/config.ts';
import { parseSignalsConfig } from '../../server/signals/config.ts';

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
  it('reads webDir "none" as no dashboard from a file, the environment and a flag alike', () => {
    writeFileSync(join(dir, 'noweb.json'), JSON.stringify({ webDir: 'none' }));
    expect(loadConfig({ flags: { config: join(dir, 'noweb.json') } }).webDir).toBeNull();
    expect(loadConfig({ env: { TIDELINE_WEB_DIR: 'none' } }).webDir).toBeNull();
    expect(loadConfig({ flags: { webDir: 'none' } }).webDir).toBeNull();
    expect(loadConfig().webDir).toBe('web/dist');
    writeFileSync(join(dir, 'web.json'), JSON.stringify({ webDir: '/srv/tideline-web' }));
    expect(loadConfig({ flags: { config: join(dir, 'web.json') } }).webDir).toBe('/srv/tideline-web');
  });
  it('names an unknown signals key at the top as signals, not "signals."', () => {
    expect(() => parseSignalsConfig({ bogus: 1 })).toThrow(/^signals: Unrecognized key: "bogus"$/);
    expect(() => parseSignalsConfig({ mqtt: { url: 'http://x' } })).toThrow(/^signals\.mqtt\.url: must be an mqtt:\/\//);
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
  it('the time window and the axis range of ingest: defaults, none for no bound, and refusals', () => {
    expect(loadConfig().ingest).toMatchObject({ maxAheadMs: 300_000, maxBehindMs: 157_788_000_000, axisMinNm: 350, axisMaxNm: 25_000 });
    const c = loadConfig({ env: { TIDELINE_MAX_AHEAD_MS: 'none', TIDELINE_AXIS_MAX_NM: '2600' }, flags: { 'ingest.maxBehindMs': 'none' } });
    expect(c.ingest).toMatchObject({ maxAheadMs: null, maxBehindMs: null, axisMaxNm: 2600 });
    expect(() => loadConfig({ flags: { 'ingest.maxAheadMs': '10' } })).toThrow(/maxAheadMs/);
    expect(() => loadConfig({ flags: { 'ingest.axisMinNm': '3000', 'ingest.axisMaxNm': '2000' } })).toThrow(/axisMinNm must be below axisMaxNm/);
  });
});
