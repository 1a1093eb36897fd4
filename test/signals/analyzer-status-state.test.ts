/** The unit state the signal channels publish keeps the analyzer's own NAMUR NE 107 report apart from Tideline's analyzer alarms. */
import { StatusCodes } from 'node-opcua';
import { describe, expect, it } from 'vitest';
import { liveValueStatus, ne107Code } from '../../server/signals/opcua/status-codes.ts';
import type { SignalEnvelope } from '../../server/signals/outbox-store.ts';
import { applyEvent, emptyUnitState, type UnitSignalState } from '../../server/signals/unit-state.ts';

const T0 = Date.parse('2026-01-05T08:00:00Z');
let seq = 0;
const ev = (type: string, payload: unknown): SignalEnvelope => ({ id: `e${++seq}`, unit: 'dryer-1', seq, type, createdAt: T0 + seq, payload });
const axisAlarm = (active: boolean) => ev('alarm', { alarm: { key: 'model-axis', kind: 'analyzer', state: active ? 'active-unacknowledged' : 'normal', active, priority: 2, message: 'axis' } });

describe('analyzer status in the unit signal state', () => {
  it('an analyzer alarm that clears returns to what the analyzer reported, not to good', () => {
    let s: UnitSignalState = { ...emptyUnitState('dryer-1', T0), resultT: T0 };
    s = applyEvent(s, ev('analyzer-status', { status: 'function-check', code: 'probe-cleaning' }), T0);
    expect(s.analyzer).toBe('function-check');
    expect(ne107Code(s.analyzer)).toBe(2);
    expect(liveValueStatus(s).equals(StatusCodes.BadOutOfService)).toBe(true);
    s = applyEvent(s, axisAlarm(true), T0);
    expect(s.analyzer).toBe('failure');
    s = applyEvent(s, ev('analyzer-status', { status: 'out-of-specification' }), T0);
    expect(s.analyzer).toBe('failure'); // Tideline's own analyzer alarm still stands
    s = applyEvent(s, axisAlarm(false), T0);
    expect(s.analyzer).toBe('out-of-specification');
    expect(liveValueStatus(s).equals(StatusCodes.UncertainSensorNotAccurate)).toBe(true);
    s = applyEvent(s, ev('analyzer-status', { status: 'good' }), T0);
    expect(s.analyzer).toBe('good');
  });
});
