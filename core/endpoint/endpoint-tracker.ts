/**
 * The endpoint state machine: running → nearing → settling → done (→ signalled, set by the
 * server once the signal has gone out). 'settling' while the rule holds but is not yet confirmed
 * over N consecutive spectra, or is confirmed before the rule's minimum time (minElapsedMin); a
 * break in confirmation goes back to 'nearing'; 'done' and 'signalled' are final for the batch.
 */
import type { DomainEvent, EndpointCriterionStatus, EndpointState, EndpointStatus } from '../monitor/types.ts';
import type { ResolvedEndpointRule } from './spec.ts';

/** Per-spectrum inputs the monitor computes for the rule (null = not available yet). */
export interface EndpointInputs {
  property: number | null;
  mbsd: number | null;
  /** Slope per minute of the plateau PC, per plateau criterion in rule order. */
  slopes: (number | null)[];
  goldenEndDistance: number | null;
  eta: { median: number; low: number; high: number } | null;
  /** Minutes since the batch start (for the rule's minimum time; omitted: not judged). */
  elapsedMin?: number | null;
}

function fmt(x: number): string {
  return Math.abs(x) >= 100 ? x.toFixed(1) : Math.abs(x) >= 1 ? x.toFixed(2) : x.toPrecision(3);
}

export class EndpointTracker {
  state: EndpointState = 'running';
  private confirmCount = 0;
  private doneAt: EndpointStatus['doneAt'] = null;
  constructor(private readonly rule: ResolvedEndpointRule) {}

  update(seq: number, t: number, inp: EndpointInputs, events: DomainEvent[]): EndpointStatus {
    const rule = this.rule;
    const criteria: EndpointCriterionStatus[] = [];
    let plateauIdx = 0;
    let allMet = true;
    let anyMet = false;
    for (const c of rule.criteria) {
      let st: EndpointCriterionStatus;
      switch (c.kind) {
        case 'property': {
          const v = inp.property;
          // With a margin the prediction must clear the target by it (threshold = target ∓ margin).
          const m = c.margin ?? 0;
          const thr = c.direction === 'below' ? c.target - m : c.target + m;
          const met = v !== null && (c.direction === 'below' ? v <= thr : v >= thr);
          const marginText = m > 0 ? ` (target ${fmt(c.target)} ${c.direction === 'below' ? '−' : '+'} margin ${fmt(m)})` : '';
          st = { criterion: 'property', met, value: v, threshold: thr, text: v === null ? `${c.name}: no prediction` : `${c.name} ${fmt(v)} ${c.unit} ${c.direction === 'below' ? (met ? '≤' : '>') : met ? '≥' : '<'} ${fmt(thr)} ${c.unit}${marginText}` };
          break;
        }
        case 'mbsd': {
          const v = inp.mbsd;
          const met = v !== null && v <= c.threshold;
          st = { criterion: 'mbsd', met, value: v, threshold: c.threshold, text: v === null ? `MBSD: waiting for ${c.block} spectra` : `MBSD ${fmt(v)} ${met ? '≤' : '>'} ${fmt(c.threshold)}` };
          break;
        }
        case 'plateau': {
          const v = inp.slopes[plateauIdx++] ?? null;
          const met = v !== null && Math.abs(v) <= c.tolerance;
          st = { criterion: 'plateau', met, value: v, threshold: c.tolerance, text: v === null ? `PC${c.pc} slope: waiting for ${c.window} spectra` : `PC${c.pc} slope ${fmt(v)}/min ${met ? 'within' : 'outside'} ±${fmt(c.tolerance)}` };
          break;
        }
        case 'golden-end': {
          const v = inp.goldenEndDistance;
          const met = v !== null && v <= c.limit;
          st = { criterion: 'golden-end', met, value: v, threshold: c.limit, text: v === null ? 'golden end: no scores' : `distance to golden end ${fmt(v)} ${met ? '≤' : '>'} ${fmt(c.limit)}` };
          break;
        }
      }
      criteria.push(st);
      allMet &&= st.met;
      anyMet ||= st.met;
    }
    const met = rule.combine === 'all' ? allMet : anyMet;
    const from = this.state;
    let reason = '';
    if (from !== 'done' && from !== 'signalled') {
      const minMin = rule.minElapsedMin ?? 0;
      const early = minMin > 0 && inp.elapsedMin !== undefined && inp.elapsedMin !== null && inp.elapsedMin < minMin;
      if (met && early && this.confirmCount + 1 >= rule.confirm) {
        // Met and confirmed, but before the rule's minimum time: not done yet.
        this.confirmCount = rule.confirm;
        this.state = 'settling';
        reason = `rule met and confirmed; no endpoint before ${fmt(minMin)} min from the batch start (${fmt(inp.elapsedMin!)} min now)`;
      } else if (met) {
        this.confirmCount++;
        if (this.confirmCount >= rule.confirm) {
          this.state = 'done';
          reason = `${criteria.filter((c) => c.met).map((c) => c.text).join('; ')} — confirmed over ${rule.confirm} spectra`;
          this.doneAt = { t, seq, reason };
        } else {
          this.state = 'settling';
          reason = `rule met (${this.confirmCount} of ${rule.confirm})`;
        }
      } else {
        this.confirmCount = 0;
        const near = (inp.eta !== null && inp.eta.median <= rule.nearingMin) || anyMet;
        if (from === 'settling') { this.state = 'nearing'; reason = 'confirmation broken'; }
        else if (from === 'running' && near) { this.state = 'nearing'; reason = inp.eta !== null && inp.eta.median <= rule.nearingMin ? `about ${fmt(inp.eta.median)} min to endpoint` : 'a criterion is met'; }
      }
      if (this.state !== from) events.push({ type: 'endpoint-state', from, to: this.state, t, seq, reason });
    }
    const done = this.state === 'done' || this.state === 'signalled';
    return {
      state: this.state,
      criteria,
      combine: rule.combine,
      confirmCount: done ? rule.confirm : this.confirmCount,
      confirmNeeded: rule.confirm,
      etaMin: done ? null : inp.eta,
      doneAt: this.doneAt,
      holds: [],
    };
  }

  /** done → signalled (the server calls this after the signal went out). */
  markSignalled(t: number, seq: number): DomainEvent | null {
    if (this.state !== 'done') return null;
    this.state = 'signalled';
    return { type: 'endpoint-state', from: 'done', to: 'signalled', t, seq, reason: 'endpoint signal sent' };
  }
}
