/** Pure helpers for the predicted-property chart of Review. */
import type { ModelVersionDetail, ResultRecord } from '../../../core/api/rest.ts';
import { sig } from '../format/number-format.ts';

/** A lab value placed on the batch's clock: minutes from the batch start. */
export interface LabPoint {
  elapsedMin: number;
  value: number;
}

/**
 * [x, predicted, lab] on one ascending x axis (minutes from the start): the predictions at the
 * results' times, the lab values at their sample times, null where a series has no point.
 */
export function propertyChartData(rs: ResultRecord[], lab: LabPoint[]): (number | null)[][] {
  const pts: { x: number; pred: number | null; lab: number | null }[] = [];
  for (const r of rs) if (r.prediction) pts.push({ x: r.elapsedMin, pred: r.prediction.value, lab: null });
  for (const l of lab) pts.push({ x: l.elapsedMin, pred: null, lab: l.value });
  pts.sort((a, b) => a.x - b.x);
  return [pts.map((p) => p.x), pts.map((p) => p.pred), pts.map((p) => p.lab)];
}

/**
 * The property target the model's endpoint rule uses, and the threshold it applies (target ∓ the
 * margin): from the model's settings and the resolved criterion of the batch's last result.
 */
export function propertyTarget(version: ModelVersionDetail | null, rs: ResultRecord[]): { target: number | null; threshold: number | null; text: string } {
  const prop = (version?.settings as { property?: { target?: number; direction?: 'below' | 'above' } } | undefined)?.property;
  const last = rs.length ? rs[rs.length - 1] : null;
  const crit = last?.endpoint.criteria.find((c) => c.criterion === 'property') ?? null;
  const target = typeof prop?.target === 'number' ? prop.target : null;
  const threshold = crit && Number.isFinite(crit.threshold) ? crit.threshold : null;
  const dir = prop?.direction === 'above' ? 'at or above' : prop?.direction === 'below' ? 'at or below' : null;
  const text =
    threshold !== null && target !== null && threshold !== target
      ? `The endpoint rule asks for the prediction ${dir ?? 'past'} ${sig(threshold)}: the target cleared by a margin for the prediction error.`
      : threshold !== null
        ? `The endpoint rule asks for the prediction ${dir ?? 'past'} ${sig(threshold)}.`
        : target !== null
          ? 'The endpoint rule does not use the predicted property; the target is the model\'s.'
          : '';
  return { target: target ?? threshold, threshold, text };
}
