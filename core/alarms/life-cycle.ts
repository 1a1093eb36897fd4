/**
 * The ISA-18.2 alarm state transitions (ANSI/ISA-18.2-2016 §11, figure "alarm state transition
 * diagram"; IEC 62682:2014 §7.3), for a non-latching alarm:
 *
 *   normal ──activate──▶ active-unacknowledged ──ack──▶ active-acknowledged ──clear──▶ normal
 *                               │ clear                                            ▲
 *                               ▼                                                  │
 *                        cleared-unacknowledged ──ack──────────────────────────────┘
 *                               └──activate──▶ active-unacknowledged
 */
import type { AlarmState } from '../monitor/types.ts';

/** State after the process condition becomes active (true) or clears (false). */
export function stateOnCondition(state: AlarmState, active: boolean): AlarmState {
  if (active) {
    switch (state) {
      case 'normal':
      case 'cleared-unacknowledged':
        return 'active-unacknowledged';
      default:
        return state;
    }
  }
  switch (state) {
    case 'active-unacknowledged':
      return 'cleared-unacknowledged';
    case 'active-acknowledged':
      return 'normal';
    default:
      return state;
  }
}

/** State after an acknowledgement, or null when there is nothing to acknowledge. */
export function stateOnAcknowledge(state: AlarmState): AlarmState | null {
  switch (state) {
    case 'active-unacknowledged':
      return 'active-acknowledged';
    case 'cleared-unacknowledged':
      return 'normal';
    default:
      return null;
  }
}

/**
 * State when an alarm returns to annunciation (unshelved, shelve expired, suppression lifted):
 * ISA-18.2 returns it to normal and re-evaluates, so a still-active condition is annunciated afresh.
 */
export function stateOnReturn(conditionActive: boolean): AlarmState {
  return conditionActive ? 'active-unacknowledged' : 'normal';
}
