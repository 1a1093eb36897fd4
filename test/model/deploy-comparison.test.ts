/**
 * What a deployment changes (core/model/deploy-comparison.ts), on a small real model and copies of
 * it with one setting changed: the progress axis with the pace judgement, and the endpoint guards.
 */
import { describe, expect, it } from 'vitest';
import { compareDeployment, type ComparableModel } from '../../core/model/deploy-comparison.ts';
import { buildSmallDryerModel } from '../server/model-fixture.ts';

describe('deploy comparison', () => {
  const { model } = buildSmallDryerModel();
  const ref = (version: number) => ({ versionId: `v${version}`, name: 'dryer-test', version, sha256: 'x' });
  const withSettings = (over: Partial<ComparableModel['settings']>): ComparableModel => ({ ...model, settings: { ...model.settings, ...over } });
  const paced = withSettings({ progress: { kind: 'indicator', source: 'property' }, alarms: { ...model.settings.alarms, pace: true } });

  it('names a change of progress axis and pace, and warns when pace is no longer judged', () => {
    const c = compareDeployment({ ref: ref(1), model: paced }, { ref: ref(2), model: withSettings({ progress: { kind: 'time' }, alarms: { ...model.settings.alarms, pace: false } }) });
    expect(c.changes.find((x) => x.what === 'progress')).toEqual({ what: 'progress', before: 'the predicted property; pace judged', after: 'elapsed time; pace not judged' });
    expect(c.warnings).toContain("dryer-test v2 does not judge the batch's pace: a slowly drying or stalled batch that stays inside its envelope is no longer flagged.");
    // the other way round: a change, no warning
    const back = compareDeployment({ ref: ref(2), model: withSettings({ progress: { kind: 'time' } }) }, { ref: ref(3), model: paced });
    expect(back.changes.map((x) => x.what)).toContain('progress');
    expect(back.warnings.some((w) => w.includes('pace'))).toBe(false);
  });

  it('names switched-off endpoint guards and warns', () => {
    const off: ComparableModel = { ...model, endpoint: { ...model.endpoint, hold: { alarms: false, extrapolation: false } } };
    const c = compareDeployment({ ref: ref(1), model }, { ref: ref(2), model: off });
    expect(c.changes.find((x) => x.what === 'endpoint guards')).toEqual({ what: 'endpoint guards', before: 'held for standing alarm and prediction outside its calibration; hysteresis 3 spectra', after: 'no alarm or calibration hold; hysteresis 3 spectra' });
    expect(c.warnings.filter((w) => w.includes('switches off'))).toHaveLength(2);
    expect(compareDeployment({ ref: ref(1), model }, { ref: ref(2), model }).changes).toEqual([]);
  });

  it('a version without an endpoint rule drops the unit\'s endpoint: it needs the signed reason, whatever the old criteria were', () => {
    const mbsdOnly: ComparableModel = { ...model, endpoint: { ...model.endpoint, criteria: [{ kind: 'mbsd', threshold: 0.01, window: 5 } as never] } };
    const none: ComparableModel = { ...model, endpoint: { ...model.endpoint, criteria: [] } };
    const c = compareDeployment({ ref: ref(1), model: mbsdOnly }, { ref: ref(2), model: none });
    expect(c.dropsEndpointProperty).toBe(true);
    expect(c.warnings[0]).toBe('dryer-test v2 has no endpoint rule: no endpoint is called or signalled on this unit.');
    // the other way round (a rule where there was none) drops nothing
    expect(compareDeployment({ ref: ref(2), model: none }, { ref: ref(3), model: mbsdOnly }).dropsEndpointProperty).toBe(false);
  });
});
