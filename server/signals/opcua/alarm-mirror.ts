/**
 * OPC UA Alarms & Conditions (IEC 62541-9) mirroring Tideline's own alarm logic. node-opcua's limit
 * and off-normal alarms would evaluate their input node themselves, without on-delay, off-delay or
 * deadband; here that evaluation is switched off and the condition follows the alarm states that
 * core/monitor and core/alarms decided (delivered through the outbox).
 *
 * - T2Limit, QLimit, PropertyLimit: ExclusiveLimitAlarmType, input node the T2 / Q / Property variable,
 *   HighLimit the current limit.
 * - DataStale, AnalyzerFault: OffNormalAlarmType, input node a Boolean variable that is true when off normal.
 */
import { DataType, StatusCodes, type Namespace, type UAObject, type UAVariable, type UAAlarmConditionEx } from 'node-opcua';
import type { UnitAlarmSummary } from '../unit-state.ts';
import { severityOf } from './status-codes.ts';

export const MIRRORED_ALARMS = {
  t2: { browseName: 'T2Limit', type: 'limit' },
  q: { browseName: 'QLimit', type: 'limit' },
  property: { browseName: 'PropertyLimit', type: 'limit' },
  stale: { browseName: 'DataStale', type: 'off-normal' },
  analyzer: { browseName: 'AnalyzerFault', type: 'off-normal' },
} as const;
export type MirroredKind = keyof typeof MIRRORED_ALARMS;

interface Mirrored {
  alarm: UAAlarmConditionEx;
  kind: MirroredKind;
  input: UAVariable;
}

function disableSelfEvaluation(alarm: UAAlarmConditionEx): void {
  // Tideline decides; node-opcua must not re-evaluate the input node on each value change.
  (alarm as unknown as { _onInputDataValueChange: () => void })._onInputDataValueChange = () => undefined;
}

export class UnitAlarmMirror {
  private readonly alarms = new Map<MirroredKind, Mirrored>();
  /** Tideline alarm id currently mirrored by each condition. */
  private readonly alarmIds = new Map<MirroredKind, string>();

  constructor(
    ns: Namespace,
    source: UAObject,
    inputs: { t2: UAVariable; q: UAVariable; property: UAVariable; stale: UAVariable; analyzer: UAVariable; normal: UAVariable },
    maxTimeShelvedMs: number,
    unitName: string,
    /** A client acknowledged a condition over OPC UA: pass it on to Tideline's alarm (by id). */
    onClientAcknowledge?: (alarmId: string, comment: string) => void,
  ) {
    for (const kind of ['t2', 'q', 'property'] as const) {
      const alarm = ns.instantiateExclusiveLimitAlarm('ExclusiveLimitAlarmType', {
        browseName: MIRRORED_ALARMS[kind].browseName,
        conditionName: MIRRORED_ALARMS[kind].browseName,
        componentOf: source,
        conditionSource: source,
        inputNode: inputs[kind],
        highLimit: 1e300,
        lowLimit: -1e300,
        maxTimeShelved: maxTimeShelvedMs,
      } as Parameters<Namespace['instantiateExclusiveLimitAlarm']>[1]);
      disableSelfEvaluation(alarm);
      this.alarms.set(kind, { alarm, kind, input: inputs[kind] });
    }
    for (const kind of ['stale', 'analyzer'] as const) {
      const alarm = ns.instantiateOffNormalAlarm({
        browseName: MIRRORED_ALARMS[kind].browseName,
        conditionName: MIRRORED_ALARMS[kind].browseName,
        componentOf: source,
        conditionSource: source,
        inputNode: inputs[kind],
        normalState: inputs.normal,
        maxTimeShelved: maxTimeShelvedMs,
      });
      disableSelfEvaluation(alarm);
      this.alarms.set(kind, { alarm, kind, input: inputs[kind] });
    }
    for (const m of this.alarms.values()) {
      m.alarm.on('acknowledged', (_eventId: unknown, comment: { text?: string | null } | null) => {
        const id = this.alarmIds.get(m.kind);
        if (id && onClientAcknowledge) onClientAcknowledge(id, comment?.text ?? '');
      });
      // SourceName: the unit id as Tideline spells it (not the namespace-qualified browse name)
      m.alarm.sourceName.setValueFromSource({ dataType: DataType.String, value: unitName });
      const b = m.alarm.currentBranch();
      b.setActiveState(false);
      b.setAckedState(true);
      b.setRetain(false);
    }
  }

  /** Update a limit (HighLimit property) when the model's limit is known. */
  setLimit(kind: 't2' | 'q' | 'property', limit: number | null): void {
    const m = this.alarms.get(kind);
    if (!m || limit === null || !Number.isFinite(limit)) return;
    const a = m.alarm as unknown as { getHighLimit(): number; setHighLimit(v: number): void };
    if (a.getHighLimit() !== limit) a.setHighLimit(limit);
  }

  /** Mirror one Tideline alarm; returns true when an OPC UA event was raised. */
  mirror(summary: UnitAlarmSummary | { key: string; kind: string; active: false; state: 'normal'; priority: number; message: string; t: number }): boolean {
    const kind = (summary.kind in MIRRORED_ALARMS ? summary.kind : summary.key) as MirroredKind;
    const m = this.alarms.get(kind);
    if (!m) return false;
    if ('id' in summary && summary.id) this.alarmIds.set(kind, summary.id);
    const alarm = m.alarm;
    const branch = alarm.currentBranch();
    const wasActive = branch.getActiveState();
    const wasAcked = branch.getAckedState();
    const active = summary.active;
    const acked = summary.state === 'active-acknowledged' || summary.state === 'normal';
    if (wasActive === active && wasAcked === acked) return false;
    const limitState = (alarm as unknown as { limitState?: { setState(s: string | null): void } }).limitState;
    if (wasActive !== active) {
      if (limitState) limitState.setState(active ? 'High' : null);
      branch.setActiveState(active);
      if (active) branch.setAckedState(false);
    }
    if (!active || acked) branch.setAckedState(acked);
    branch.setRetain(active || !acked);
    alarm.raiseNewCondition({
      message: summary.message || `${summary.key} ${active ? 'active' : 'cleared'}`,
      severity: severityOf(summary.priority),
      quality: StatusCodes.Good,
      retain: active || !acked,
      time: new Date(summary.t),
    });
    return true;
  }

  isActive(kind: MirroredKind): boolean {
    return this.alarms.get(kind)?.alarm.currentBranch().getActiveState() ?? false;
  }
}
