/**
 * A key that is no build setting is refused, by name, instead of building on the default it meant
 * to change: in core (resolveBuildSettings, the path of files and the CLI) and at the REST boundary
 * (RFC 9457 problem `unknown-setting`, each key in errors[].path), before anything is built.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { resolveBuildSettings, unknownBuildSettingKeys } from '../../core/model/build-settings.ts';
import { login, startTestServer, type TestServer } from '../server/helpers.ts';

const base = { name: 'dryer-a', product: 'granule A', author: 'mo', createdAt: 0 };

describe('build settings: unknown keys', () => {
  it('names misspelt keys at the top, in the groups and in list items; accepts every real one', () => {
    const full = {
      ...base, components: 3, confidence: 0.99, qMethod: 'box', progress: { kind: 'indicator', source: 'pc1' },
      envelope: { k: 3, smoothing: 2, points: 100, band: 'sd' }, alarms: { onDelay: 3, onWindow: 5, offDelay: 5, deadband: 0.05, limits: 'local', startupMin: 2, confidence: 0.999, pace: true },
      property: { name: 'moisture', unit: '% w/w', components: 2, target: 2, direction: 'below', range: [0, 20], extrapolationConfidence: 0.99 },
      excludeSpectra: [{ batch: 'B1', index: 4 }],
    };
    expect(unknownBuildSettingKeys(full)).toEqual([]);
    expect(unknownBuildSettingKeys({ ...full, component: 2, alarms: { ...full.alarms, confidance: 0.999 }, property: { ...full.property, taget: 2 }, progress: { kind: 'time', sourse: 'x' }, envelope: { ...full.envelope, K: 2 }, excludeSpectra: [{ batch: 'B1', index: 1 }, { batch: 'B2', idx: 3 }] })).toEqual([
      'component', 'progress.sourse', 'envelope.K', 'alarms.confidance', 'property.taget', 'excludeSpectra.1.idx',
    ]);
    expect(() => resolveBuildSettings({ ...base, alarms: { confidance: 0.999 } })).toThrow(/"alarms\.confidance" is not a setting/);
    expect(() => resolveBuildSettings({ ...base, compnents: 4, confidenc: 0.95 })).toThrow(/"compnents", "confidenc" are not settings/);
    expect(resolveBuildSettings({ ...base, alarms: { confidence: 0.999 } }).alarms.confidence).toBe(0.999);
  });
});

describe('POST /api/models/build with a misspelt setting', () => {
  let ts: TestServer;
  beforeAll(async () => {
    ts = await startTestServer();
  });
  afterAll(async () => ts.stop());

  it('is refused with a problem naming each key; no version is made', async () => {
    const mo = await login(ts, 'model-owner');
    const r = await mo.post('/api/models/build', { name: 'dryer-a', product: 'granule A', referenceBatches: ['B-1', 'B-2'], settings: { confidence: 0.95, alarms: { confidance: 0.999 }, compnents: 4 } });
    expect(r.status).toBe(400);
    expect(r.type).toMatch(/application\/problem\+json/);
    expect(r.body).toMatchObject({ type: expect.stringMatching(/\/problems\/unknown-setting$/), title: 'Unknown setting' });
    expect(r.body.errors).toEqual([
      { path: 'body.settings.compnents', message: 'not a build setting' },
      { path: 'body.settings.alarms.confidance', message: 'not a build setting' },
    ]);
    expect(r.body.detail).toMatch(/"compnents", "alarms\.confidance" are not build settings: nothing was built/);
    expect((await mo.get('/api/models')).body.items).toEqual([]);
  });
});
