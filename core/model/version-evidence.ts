/**
 * The evidence of a model version in the form the version detail API (core/api/rest.ts) and the
 * batch report show it: the endpoint rule with every resolved threshold and how it was obtained,
 * the property model's cross-validation, the reference endpoints and the leave-one-batch-out check.
 */
import type { EndpointCheckView, EndpointCriterionView, EndpointRuleView, PropertyModelView, ReferenceEndpointView } from '../api/rest.ts';
import type { MonitoringModel } from './monitoring-model.ts';
import { DEFAULT_HYSTERESIS } from '../endpoint/spec.ts';

export const ENDPOINT_CAUTION = "Tideline advises: an endpoint signal is used within the site's validated control strategy; interlocks and operating procedures decide what it may do.";

const num = (v: number) => (Math.abs(v) >= 100 ? v.toFixed(1) : Math.abs(v) >= 1 ? v.toFixed(3) : v.toPrecision(3));

export function endpointRuleView(m: Pick<MonitoringModel, 'endpoint'>): EndpointRuleView {
  const criteria = m.endpoint.criteria.map((c): EndpointCriterionView => {
    switch (c.kind) {
      case 'property': {
        const margin = c.margin ?? 0;
        const threshold = c.direction === 'below' ? c.target - margin : c.target + margin;
        const rel = c.direction === 'below' ? '≤' : '≥';
        const marginText = margin > 0 ? ` (target ${num(c.target)} ${c.direction === 'below' ? '−' : '+'} margin ${num(margin)})` : '';
        return { kind: 'property', text: `predicted ${c.name} ${rel} ${num(threshold)} ${c.unit}${marginText}`, threshold, method: margin > 0 ? `target set by the model owner; margin ${c.marginMethod ?? 'fixed'}` : 'target set by the model owner; no margin' };
      }
      case 'mbsd':
        return { kind: 'mbsd', text: `moving-block SD over ${c.block} spectra ≤ ${num(c.threshold)}`, threshold: c.threshold, method: c.method ?? 'not recorded (model built before thresholds carried their method)' };
      case 'plateau':
        return { kind: 'plateau', text: `|slope of PC${c.pc}| over ${c.window} spectra ≤ ${num(c.tolerance)} per min`, threshold: c.tolerance, method: c.method ?? 'not recorded (model built before thresholds carried their method)' };
      case 'golden-end':
        return { kind: 'golden-end', text: `distance to the golden end region ≤ ${num(c.limit)}`, threshold: c.limit, method: c.method ?? 'not recorded (model built before thresholds carried their method)' };
    }
  });
  return {
    criteria, combine: m.endpoint.combine, confirm: m.endpoint.confirm, nearingMin: m.endpoint.nearingMin,
    minElapsedMin: m.endpoint.minElapsedMin ?? 0, minElapsedMethod: m.endpoint.minElapsedMethod ?? 'none',
    hold: m.endpoint.hold ?? { alarms: true, extrapolation: true }, hysteresis: m.endpoint.hysteresis ?? DEFAULT_HYSTERESIS,
    caution: ENDPOINT_CAUTION,
  };
}

export function propertyModelView(m: Pick<MonitoringModel, 'pls' | 'settings'>): PropertyModelView | null {
  const p = m.pls;
  const ev = p?.evidence;
  if (!p || !ev) return null;
  const lim = p.limits;
  return {
    name: p.name,
    unit: p.unit,
    target: m.settings.property?.target ?? null,
    direction: m.settings.property?.target !== undefined ? (m.settings.property?.direction ?? 'below') : null,
    components: p.components,
    componentsRule: ev.componentsRule,
    atSearchLimit: ev.atSearchLimit,
    cvMethod: ev.cvMethod,
    rmsecv: ev.rmsecv,
    rmsecv0: ev.rmsecv0,
    bias: ev.bias,
    nLabValues: ev.nLabValues,
    nBatchesWithLab: ev.nBatchesWithLab,
    nBatches: ev.nBatches,
    batchesWithoutLab: ev.batchesWithoutLab,
    calibrationRange: ev.labRange,
    restrictedTo: p.range,
    labSd: m.settings.property?.labSd ?? null,
    extrapolation: {
      confidence: lim.confidence, t2Limit: lim.t2Limit, qLimit: lim.qLimit, t2Method: lim.t2Method, qMethod: lim.qMethod,
      method: ev.extrapolation?.method ?? 'limits from the lab rows alone (a model built before the flag was calibrated over the whole batch range)',
    },
  };
}

export function referenceEndpointsView(m: Pick<MonitoringModel, 'meta'>): ReferenceEndpointView[] {
  return (m.meta.referenceEndpoints ?? []).map((e) => ({ ...e }));
}

export function endpointCheckView(m: Pick<MonitoringModel, 'meta'>): EndpointCheckView | null {
  const c = m.meta.endpointCheck;
  return c ? { ...c, rows: c.rows.map((r) => ({ ...r })) } : null;
}
