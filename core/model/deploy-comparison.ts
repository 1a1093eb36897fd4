/**
 * What a deployment changes on a unit: the version to deploy against the one it replaces — endpoint
 * rule, property model, limits, alarm limits, components, analyzer axis, product. A deployment
 * that silently dropped the moisture endpoint of a dryer is the case this exists for: the
 * comparison names it, and the API asks for a confirmation with a reason before it goes ahead.
 * Pure: no I/O.
 */
import type { DeployChange, DeployComparison, ModelRef } from '../api/rest.ts';
import { criterionName, limitMethodName, plainText } from '../vocabulary/plain-names.ts';
import { endpointRuleView, propertyModelView } from './version-evidence.ts';
import type { MonitoringModel } from './monitoring-model.ts';

export type ComparableModel = Pick<MonitoringModel, 'endpoint' | 'pls' | 'settings' | 'limits' | 'alarmLimits' | 'pca' | 'chain'>;

const num = (v: number | null | undefined) => (v === null || v === undefined || !Number.isFinite(v) ? '—' : Number(v.toPrecision(4)).toString());

function ruleText(m: ComparableModel): string {
  const r = endpointRuleView(m);
  if (r.criteria.length === 0) return 'none';
  const crit = r.criteria.map((c) => `${criterionName(c.kind)}: ${plainText(c.text)}`).join(r.combine === 'all' ? ' and ' : ' or ');
  return `${crit}; confirmed over ${r.confirm} spectra${r.minElapsedMin > 0 ? `; not before ${num(r.minElapsedMin)} min` : ''}`;
}

/** The run-time guards that hold a met rule ('held'), in words; switching one off is a change a deployment names. */
function guardText(m: ComparableModel): string {
  const r = endpointRuleView(m);
  if (r.criteria.length === 0) return 'none';
  const hold = r.hold ?? { alarms: true, extrapolation: true };
  const on = [hold.alarms ? 'standing alarm' : null, hold.extrapolation && hasPropertyEndpoint(m) ? 'prediction outside its calibration' : null].filter((g) => g !== null);
  return `${on.length ? `held for ${on.join(' and ')}` : 'no alarm or calibration hold'}; hysteresis ${r.hysteresis ?? 3} spectra`;
}

/** The progress axis and whether the batch's pace is judged on it. */
function progressText(m: ComparableModel): string {
  const p = m.settings.progress;
  const axis = p.kind === 'time' ? 'elapsed time' : p.source === 'property' ? 'the predicted property' : 'the PC1 score';
  return `${axis}; pace ${m.settings.alarms.pace === true && p.kind === 'indicator' ? 'judged' : 'not judged'}`;
}

function propertyText(m: ComparableModel): string | null {
  const p = propertyModelView(m);
  if (!p) return null;
  return `${p.name} (${p.unit}), ${p.components} latent variables${p.target !== null ? `, target ${p.direction === 'above' ? '≥ ' : p.direction === 'below' ? '≤ ' : ''}${num(p.target)} ${p.unit}` : ''}`;
}

function axisText(m: ComparableModel): string {
  const a = m.chain.inputAxis;
  return a.length ? `${a.length} points, ${num(a[0])}–${num(a[a.length - 1])} nm` : 'none';
}

function hasPropertyEndpoint(m: ComparableModel): boolean {
  return m.endpoint.criteria.some((c) => c.kind === 'property');
}

/** The comparison of `next` against `current` (null: nothing deployed on the unit). */
export function compareDeployment(current: { ref: ModelRef; model: ComparableModel } | null, next: { ref: ModelRef; model: ComparableModel }): DeployComparison {
  if (!current) {
    return { replaces: null, changes: [], warnings: [`Nothing is deployed on this unit now: from the next batch on, ${next.ref.name} v${next.ref.version} judges its batches.`], dropsEndpointProperty: false };
  }
  const a = current.model;
  const b = next.model;
  const changes: DeployChange[] = [];
  const diff = (what: string, before: string | null, after: string | null) => {
    if (before !== after) changes.push({ what, before, after });
  };
  diff('product', String(a.settings.product ?? ''), String(b.settings.product ?? ''));
  diff('analyzer axis', axisText(a), axisText(b));
  diff('endpoint rule', ruleText(a), ruleText(b));
  diff('endpoint guards', guardText(a), guardText(b));
  diff('property model', propertyText(a), propertyText(b));
  diff('progress', progressText(a), progressText(b));
  diff('components', String(a.pca.nComponents), String(b.pca.nComponents));
  diff('limit confidence', `${num(a.limits.t2.confidence * 100)} %`, `${num(b.limits.t2.confidence * 100)} %`);
  diff('T² limit', `${num(a.limits.t2.value)} (${limitMethodName(a.limits.t2.method)})`, `${num(b.limits.t2.value)} (${limitMethodName(b.limits.t2.method)})`);
  diff('Q limit', `${num(a.limits.q.value)} (${limitMethodName(a.limits.q.method)})`, `${num(b.limits.q.value)} (${limitMethodName(b.limits.q.method)})`);
  const al = (m: ComparableModel) => (m.alarmLimits ? `T² ${num(m.alarmLimits.t2.value)}, Q ${num(m.alarmLimits.q.value)} at ${num(m.alarmLimits.confidence * 100)} %` : 'the limits above');
  diff('alarm limits', al(a), al(b));

  const warnings: string[] = [];
  const lostProperty = a.pls !== undefined && b.pls === undefined;
  const lostPropertyEndpoint = hasPropertyEndpoint(a) && !hasPropertyEndpoint(b);
  // A version with no endpoint rule at all where the deployed one has one drops the unit's endpoint
  // whatever its criteria were: confirmed (and signed) like a dropped property.
  const lostRule = a.endpoint.criteria.length > 0 && b.endpoint.criteria.length === 0;
  const dropsEndpointProperty = lostProperty || lostPropertyEndpoint || lostRule;
  if (lostProperty || lostPropertyEndpoint) {
    const p = propertyModelView(a);
    const name = p ? `${p.name} (${p.unit})` : 'property';
    warnings.push(
      lostProperty
        ? `${next.ref.name} v${next.ref.version} has no property model: the predicted ${name} and its endpoint criterion of ${current.ref.name} v${current.ref.version} are dropped; the endpoint becomes "${ruleText(b)}".`
        : `${next.ref.name} v${next.ref.version} drops the endpoint criterion on the predicted ${name}; the endpoint becomes "${ruleText(b)}".`,
    );
  }
  if (b.endpoint.criteria.length === 0 && a.endpoint.criteria.length > 0) warnings.push(`${next.ref.name} v${next.ref.version} has no endpoint rule: no endpoint is called or signalled on this unit.`);
  const holdOff = (key: 'alarms' | 'extrapolation') => a.endpoint.criteria.length > 0 && b.endpoint.criteria.length > 0 && (a.endpoint.hold?.[key] ?? true) && !(b.endpoint.hold?.[key] ?? true);
  if (holdOff('alarms')) warnings.push(`${next.ref.name} v${next.ref.version} switches off the alarm guard: its endpoint may be called done while a confirmed T², Q or envelope alarm stands.`);
  if (holdOff('extrapolation') && hasPropertyEndpoint(b)) warnings.push(`${next.ref.name} v${next.ref.version} switches off the calibration guard: its endpoint may be called done on a prediction outside its calibration.`);
  if (progressText(a).endsWith('pace judged') && !progressText(b).endsWith('pace judged')) warnings.push(`${next.ref.name} v${next.ref.version} does not judge the batch's pace: a slowly drying or stalled batch that stays inside its envelope is no longer flagged.`);
  if (a.pca.nComponents !== b.pca.nComponents) warnings.push(`The number of components changes from ${a.pca.nComponents} to ${b.pca.nComponents}: the Floor and Watch score charts change with it.`);
  return { replaces: current.ref, changes, warnings, dropsEndpointProperty };
}
