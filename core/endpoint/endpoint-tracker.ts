/**
 * The endpoint state machine: running → nearing → settling → (held) → done (→ signalled, set by
 * the server once the signal has gone out).
 * - 'nearing' once the estimated time to endpoint is within the rule's nearingMin, or a criterion
 *   is met, for `hysteresis` spectra in a row.
 * - 'settling' while the rule is met but not yet confirmed over `confirm` consecutive spectra.
 * - 'held' when the rule is met and confirmed but a guard stands: the batch is younger than the
 *   rule's minimum time (minElapsedMin), a confirmed T², Q, combined-index or envelope alarm stands
 *   (hold.alarms), or the property prediction is outside its calibration (hold.extrapolation; for
 *   rules with a property criterion; released only after `hysteresis` predictions in a row inside
 *   it). Every standing guard is listed in EndpointStatus.holds.
 * - 'done' when the rule is met and confirmed and no guard stands — from 'held' only once every
 *   guard has cleared while the rule is still met. 'done' and 'signalled' are final for the batch.
 * Hysteresis: a spectrum failing the rule restarts the confirmation count, but 'settling' or
 * 'held' steps back to 'nearing' only after `hysteresis` spectra in a row fail it, so a noisy
 * prediction near its threshold does not flap the state (and every channel) back and forth.
 * While held, a change of its reasons is an event of its own (from 'held' to 'held').
 */
import type { DomainEvent, EndpointCriterionStatus, EndpointHold, EndpointState, EndpointStatus } from '../monitor/types.ts';
import { DEFAULT_HYSTERESIS, type ResolvedEndpointRule } from './spec.ts';

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
  /** Confirmed alarms standing, in words, one per alarm (omitted: not judged). */
  standingAlarms?: string[];
  /** Whether the property prediction is outside its calibration on this spectrum (omitted / null: not judged). */
  extrapolating?: boolean | null;
}

function sameHolds(a: EndpointHold[], b: EndpointHold[]): boolean {
  return a.length === b.length && a.every((h, i) => h.code === b[i]!.code && h.text === b[i]!.text);
}

function fmt(x: number): string {
  return Math.abs(x) >= 100 ? x.toFixed(1) : Math.abs(x) >= 1 ? x.toFixed(2) : x.toPrecision(3);
}

export class EndpointTracker {
  state: EndpointState = 'running';
  private confirmCount = 0;
  private doneAt: EndpointStatus['doneAt'] = null;
  /** Consecutive spectra failing the rule (settling / held), saying 'near' (running). */
  private failCount = 0;
  private nearCount = 0;
  /** Consecutive predictions inside calibration (release of the extrapolation guard); starts released. */
  private inCalibration = Number.POSITIVE_INFINITY;
  private lastHolds: EndpointHold[] = [];
  private readonly hasProperty: boolean;
  constructor(private readonly rule: ResolvedEndpointRule) {
    this.hasProperty = rule.criteria.some((c) => c.kind === 'property');
  }

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
    const hyst = Math.max(1, rule.hysteresis ?? DEFAULT_HYSTERESIS);
    const hold = rule.hold ?? { alarms: true, extrapolation: true };
    let reason = '';
    let holds: EndpointHold[] = [];
    if (from !== 'done' && from !== 'signalled') {
      // Release count of the extrapolation guard: predictions in a row inside calibration.
      if (inp.extrapolating === true) this.inCalibration = 0;
      else if (inp.extrapolating === false) this.inCalibration++;
      if (met) {
        this.failCount = 0;
        this.nearCount = 0;
        if (this.confirmCount < rule.confirm) this.confirmCount++;
        if (this.confirmCount >= rule.confirm) {
          holds = this.guards(inp, hold, hyst);
          if (holds.length) {
            this.state = 'held';
            if (from !== 'held') reason = `rule met and confirmed over ${rule.confirm} spectra${inp.elapsedMin != null ? ` at ${fmt(inp.elapsedMin)} min` : ''}; held: ${holds.map((h) => h.text).join('; ')}`;
          } else {
            this.state = 'done';
            reason = `${criteria.filter((c) => c.met).map((c) => c.text).join('; ')} — confirmed over ${rule.confirm} spectra${from === 'held' ? '; every guard cleared' : ''}`;
            this.doneAt = { t, seq, reason };
          }
        } else if (from === 'held' && (holds = this.guards(inp, hold, hyst)).length) {
          // Held, the rule met again after a dip: confirmation counts again within 'held'.
          this.state = 'held';
        } else {
          this.state = 'settling';
          reason = `rule met (${this.confirmCount} of ${rule.confirm})`;
        }
      } else {
        // Confirmation needs consecutive spectra: it starts again. The state steps back only after
        // `hyst` spectra in a row fail the rule (hysteresis), so one noisy spectrum does not flap it.
        this.confirmCount = 0;
        this.failCount++;
        if (from === 'settling' || from === 'held') {
          if (this.failCount >= hyst) {
            this.state = 'nearing';
            reason = `rule no longer met (${this.failCount} spectra in a row)`;
          } else if (from === 'held') {
            holds = this.guards(inp, hold, hyst);
            // The guards cleared while the rule dipped: no longer held, confirmation starts again.
            if (!holds.length) { this.state = 'settling'; reason = 'guards cleared; rule not met on this spectrum, confirmation starts again'; }
          }
        } else if (from === 'running') {
          const etaNear = inp.eta !== null && inp.eta.median <= rule.nearingMin;
          if (etaNear || anyMet) this.nearCount++;
          else this.nearCount = 0;
          if (this.nearCount >= hyst) { this.state = 'nearing'; reason = etaNear ? `about ${fmt(inp.eta!.median)} min to endpoint` : 'a criterion is met'; }
        }
      }
      if (this.state !== from) events.push({ type: 'endpoint-state', from, to: this.state, t, seq, reason, holds: this.state === 'held' ? holds : [] });
      else if (this.state === 'held' && !sameHolds(this.lastHolds, holds)) {
        // Held for other reasons now (a guard cleared, another came up): a change of its own on every channel.
        events.push({ type: 'endpoint-state', from, to: this.state, t, seq, reason: `held: ${holds.map((h) => h.text).join('; ')}`, holds });
      }
      this.lastHolds = this.state === 'held' ? holds : [];
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
      holds: this.state === 'held' ? holds : [],
    };
  }

  /** The guards standing on this spectrum (empty: none). */
  private guards(inp: EndpointInputs, hold: { alarms: boolean; extrapolation: boolean }, hyst: number): EndpointHold[] {
    const rule = this.rule;
    const out: EndpointHold[] = [];
    const minMin = rule.minElapsedMin ?? 0;
    if (minMin > 0 && inp.elapsedMin !== undefined && inp.elapsedMin !== null && inp.elapsedMin < minMin) {
      out.push({ code: 'min-elapsed', text: `no endpoint before ${fmt(minMin)} min from the batch start${rule.minElapsedMethod ? ` (${rule.minElapsedMethod})` : ''}` });
    }
    if (hold.alarms && inp.standingAlarms) for (const a of inp.standingAlarms) out.push({ code: 'alarm', text: a });
    if (hold.extrapolation && this.hasProperty && inp.extrapolating !== undefined && inp.extrapolating !== null && (inp.extrapolating || this.inCalibration < hyst)) {
      // Held from a flagged prediction until `hyst` predictions in a row are inside calibration.
      const prop = rule.criteria.find((c) => c.kind === 'property');
      out.push({ code: 'extrapolating', text: `${prop && prop.kind === 'property' ? prop.name : 'property'} prediction outside its calibration (leverage or residual beyond its limit); released after ${hyst} predictions in a row inside it` });
    }
    return out;
  }

  /** done → signalled (the server calls this after the signal went out). */
  markSignalled(t: number, seq: number): DomainEvent | null {
    if (this.state !== 'done') return null;
    this.state = 'signalled';
    return { type: 'endpoint-state', from: 'done', to: 'signalled', t, seq, reason: 'endpoint signal sent', holds: [] };
  }
}
