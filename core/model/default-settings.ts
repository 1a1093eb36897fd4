/**
 * Per-kind default build settings for a monitoring model (dryer, reactor): the settings the
 * evaluation (`npm run evaluate`, scripts/evaluate.ts) measured against the evaluation targets, shared
 * with the demo so both build the same models. Pure: no clock (createdAt is a fixed date unless
 * overridden). Overrides replace top-level fields; `alarms` and `envelope` merge field by field.
 *
 * Choices (common practice unless a source is named):
 * - monitoring chain: centring only — no scatter correction, so additive spikes and offsets stay
 *   visible (Bogomolov, Mannhardt & Heinzerling 2018 on SNV/MSC removing information in drying);
 * - property model: MSC (Geladi, MacDougall & Martens 1985) then centring, calibrated locally around
 *   the endpoint target (the endpoint call needs accuracy there);
 * - limits: 99 % drawn on the charts (and for the false-alarm point rate), alarms raised at 99.9 %
 *   (action limits): with alarms at the 99 % limits one good batch in ten raised a confirmed alarm
 *   on 120 simulated good batches of each kind; at 99.9 % about one in thirty (`npm run evaluate`);
 * - pace judged (core/monitor/pace.ts): progress is an indicator variable, so a stalled reaction or
 *   slow drying would otherwise sit inside the envelope; it added no false alarm on those 120
 *   batches and found 8 of 8 stalled reactions and 8 of 8 slowed dryers;
 * - endpoint: the predicted property past its target, confirmed over 2 spectra; for the dryer by
 *   z(0.7)·RMSECV (about 0.009 % w/w): with no margin 4 of 120 simulated good batches were called
 *   early, one by 2 spectra; with it one by 1 spectrum, the median call 2 spectra late; for the reactor the
 *   prediction must clear the target by z(confidence)·RMSECV (a one-sided bound on the prediction
 *   error): conversion changes by only ~0.007 % per 20 s spectrum near 99 %, so an unguarded call
 *   lands early whenever the batch's prediction bias is positive;
 *
 * Tideline advises: the site's validated control strategy, interlocks and procedures decide what
 * an alarm or endpoint signal may do.
 */
import type { BuildSettings } from './build-settings.ts';

export type ProcessKind = 'dryer' | 'reactor';

export type BuildSettingsOverrides = Partial<Omit<BuildSettings, 'alarms' | 'envelope'>> & {
  alarms?: Partial<BuildSettings['alarms']>;
  envelope?: Partial<BuildSettings['envelope']>;
};

const PROPERTY_CHAIN: BuildSettings['chain'] = [{ step: 'msc' }, { step: 'scale', center: true, scaling: 'none' }];

export function defaultBuildSettings(kind: ProcessKind, overrides: BuildSettingsOverrides = {}): BuildSettings {
  if (kind !== 'dryer' && kind !== 'reactor') throw new RangeError(`defaultBuildSettings: kind must be "dryer" or "reactor", got "${String(kind)}"`);
  const dryer = kind === 'dryer';
  const base: BuildSettings = {
    name: `${kind} model`,
    product: `${kind} demo product`,
    author: 'tideline defaults',
    createdAt: Date.UTC(2026, 2, 1),
    chain: [{ step: 'scale', center: true, scaling: 'none' }],
    components: 5,
    confidence: 0.99,
    progress: { kind: 'indicator', source: 'property' },
    envelope: { k: 3, smoothing: 2, points: 100, band: 'prediction' },
    alarms: { onDelay: 3, onWindow: 5, offDelay: 5, deadband: 0.05, limits: 'local', startupMin: 2, confidence: 0.999, pace: true },
    property: dryer
      ? { name: 'moisture', unit: '% w/w', components: 'auto', target: 2, direction: 'below', chain: PROPERTY_CHAIN, range: [0, 4] }
      : { name: 'conversion', unit: '%', components: 'auto', target: 99, direction: 'above', chain: PROPERTY_CHAIN, range: [93, 100] },
    endpoint: dryer
      ? { criteria: [{ kind: 'property', margin: 'auto', marginConfidence: 0.7 }], combine: 'all', confirm: 2, nearingMin: 10 }
      : { criteria: [{ kind: 'property', margin: 'auto' }], combine: 'all', confirm: 2, nearingMin: 10 },
  };
  const { alarms, envelope, ...rest } = overrides;
  const given = Object.fromEntries(Object.entries(rest).filter(([, v]) => v !== undefined)) as Partial<BuildSettings>;
  return {
    ...base,
    ...given,
    alarms: { ...base.alarms, ...(alarms ?? {}) },
    envelope: { ...base.envelope, ...(envelope ?? {}) },
  };
}
