/**
 * On-delay / off-delay filtering of a monitored condition, so alarms do not chatter (alarm
 * management practice per ANSI/ISA-18.2-2016 §§ on alarm deadband and on/off delay; EEMUA 191).
 *
 * - On-delay "k of m": the condition becomes active when at least `onDelay` of the last `onWindow`
 *   samples were out of limit. A single out-of-limit sample that does not (yet) activate the
 *   condition is reported as suspect (a suspect scan, not an alarm).
 * - Off-delay and deadband: an active condition clears only after `offDelay` consecutive samples
 *   below limit·(1 − deadband) (deadband as a fraction of the limit; for two-sided envelope checks
 *   the value is |z| and the limit k).
 * No allocation per update: the window is a bit ring in one integer (onWindow ≤ 31).
 */

export interface ConditionFilterSpec {
  onDelay: number;
  onWindow: number;
  offDelay: number;
  deadband: number;
}

export interface ConditionUpdate {
  /** The out-of-limit test for this sample. */
  exceeded: boolean;
  /** Active after this sample. */
  active: boolean;
  /** Changed state with this sample. */
  changed: boolean;
  /** Out of limit but not (yet) active. */
  suspect: boolean;
}

export function validateConditionFilterSpec(s: ConditionFilterSpec): ConditionFilterSpec {
  const { onDelay, onWindow, offDelay, deadband } = s;
  if (!Number.isInteger(onWindow) || onWindow < 1 || onWindow > 31) throw new RangeError(`alarms.onWindow must be an integer 1…31 (got ${onWindow})`);
  if (!Number.isInteger(onDelay) || onDelay < 1 || onDelay > onWindow) throw new RangeError(`alarms.onDelay must be an integer 1…onWindow (${onWindow}) (got ${onDelay})`);
  if (!Number.isInteger(offDelay) || offDelay < 1) throw new RangeError(`alarms.offDelay must be an integer ≥ 1 (got ${offDelay})`);
  if (!(deadband >= 0 && deadband < 1)) throw new RangeError(`alarms.deadband must be in [0, 1) (got ${deadband})`);
  return s;
}

export class ConditionFilter {
  private bits = 0;
  private filled = 0;
  private below = 0;
  active = false;
  private readonly mask: number;
  constructor(private readonly spec: ConditionFilterSpec) {
    validateConditionFilterSpec(spec);
    this.mask = (1 << spec.onWindow) - 1;
  }

  /** One sample: value against an upper limit (value > limit is out). */
  update(value: number, limit: number): ConditionUpdate {
    const exceeded = value > limit;
    const wasActive = this.active;
    if (!this.active) {
      this.bits = ((this.bits << 1) | (exceeded ? 1 : 0)) & this.mask;
      if (this.filled < this.spec.onWindow) this.filled++;
      if (exceeded && popcount(this.bits) >= this.spec.onDelay) {
        this.active = true;
        this.below = 0;
      }
    } else {
      if (value < limit * (1 - this.spec.deadband)) this.below++;
      else this.below = 0;
      if (this.below >= this.spec.offDelay) {
        this.active = false;
        this.bits = 0;
        this.filled = 0;
        this.below = 0;
      }
    }
    return { exceeded, active: this.active, changed: this.active !== wasActive, suspect: exceeded && !this.active };
  }

  reset(): void {
    this.bits = 0;
    this.filled = 0;
    this.below = 0;
    this.active = false;
  }
}

function popcount(x: number): number {
  let c = 0;
  while (x) { x &= x - 1; c++; }
  return c;
}
