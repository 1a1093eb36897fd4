/**
 * OPC UA Alarms & Conditions (IEC 62541-9) mirroring Tideline's own alarm logic. node-opcua's limit
 * and off-normal alarms would evaluate their input node themselves, without on-delay, off-delay or
 * deadband; here that evaluation is switched off and the condition follows the alarm states that
 * core/monitor and core/alarms decided (delivered through the outbox).
 *
 * - T2Limit, QLimit, PropertyLimit: ExclusiveLimitAlarmType, input node the T2 / Q / Property variable,
 *   HighLimit the current limit.
 * - DataStale, AnalyzerFault, ModelHealth: OffNormalAlarmType, input node a Boolean variable that is
 *   true when off normal (ModelHealth: the low-priority alarm of a failing model-health test,
 *   docs/model-life.md).
 *
 * Shelving (IEC 62541-9 ShelvedStateMachineType, the condition's optional ShelvingState) mirrors
 * Tideline's shelve: TimedShelved while Tideline holds the alarm shelved, UnshelveTime the time left
 * until Tideline's own expiry, Unshelved again when an operator unshelves or the shelve time ends
 * (Tideline's tick decides; node-opcua's own unshelve timer is never started). The shelve's who, until
 * when and why go into the condition's Comment and ClientUserId. SuppressedState mirrors Tideline's
 * suppression by design when an alarm carries it. SuppressedOrShelved follows both (node-opcua).
 *
 * Shelving from the DCS over OPC UA (TimedShelve, OneShotShelve, Unshelve) is refused: the methods
 * read Executable = false and a call returns BadNotExecutable. An ISA-18.2 shelve needs an authorised
 * person, a reason and an audit record; an OPC UA session here carries no Tideline user (anonymous or a
 * certificate of the DCS) and TimedShelve has no reason argument, so accepting it would be an
 * anonymous, unexplained suppression of an alarm, and an Unshelve from the DCS would make the
 * condition and Tideline's alarm disagree. Operators shelve and unshelve in Tideline (dashboard or
 * POST /api/alarms/{id}/shelve), where it is audited; the DCS sees the result here.
 */
import {
  DataType,
  DataValue,
  StatusCodes,
  type Namespace,
  type UAMethod,
  type UAObject,
  type UAVariable,
  type UAAlarmConditionEx,
} from 'node-opcua';
import type { UnitAlarmSummary } from '../unit-state.ts';
import { severityOf } from './status-codes.ts';

export const MIRRORED_ALARMS = {
  t2: { browseName: 'T2Limit', type: 'limit' },
  q: { browseName: 'QLimit', type: 'limit' },
  property: { browseName: 'PropertyLimit', type: 'limit' },
  stale: { browseName: 'DataStale', type: 'off-normal' },
  analyzer: { browseName: 'AnalyzerFault', type: 'off-normal' },
  'model-health': { browseName: 'ModelHealth', type: 'off-normal' },
} as const;
export type MirroredKind = keyof typeof MIRRORED_ALARMS;

interface Mirrored {
  alarm: UAAlarmConditionEx;
  kind: MirroredKind;
  input: UAVariable;
  /** Tideline's shelve as mirrored now (null: unshelved). */
  shelf: UnitAlarmSummary['shelf'];
  suppressed: boolean;
}

/** What the mirror needs of a Tideline alarm (UnitAlarmSummary, or a cleared stand-in). */
export type MirrorInput = Pick<UnitAlarmSummary, 'key' | 'kind' | 'active' | 'state' | 'priority' | 'message' | 't'> &
  Partial<Pick<UnitAlarmSummary, 'id' | 'shelf' | 'suppressed'>>;

type ShelvingState = UAObject & {
  setState(name: string): void;
  getCurrentState(): string | null;
  unshelveTime?: UAVariable;
  timedShelve?: UAMethod;
  oneShotShelve?: UAMethod;
  unshelve?: UAMethod;
};

function shelvingStateOf(alarm: UAAlarmConditionEx): ShelvingState {
  const s = (alarm as unknown as { shelvingState?: ShelvingState }).shelvingState;
  if (!s) throw new Error(`condition ${alarm.browseName.toString()} has no ShelvingState`);
  return s;
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
    inputs: { t2: UAVariable; q: UAVariable; property: UAVariable; stale: UAVariable; analyzer: UAVariable; 'model-health': UAVariable; normal: UAVariable },
    maxTimeShelvedMs: number,
    unitName: string,
    /** A client acknowledged a condition over OPC UA: pass it on to Tideline's alarm (by id). */
    onClientAcknowledge?: (alarmId: string, comment: string) => void,
    private readonly now: () => number = Date.now,
  ) {
    const optionals = ['ShelvingState', 'SuppressedState'];
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
        optionals: [...optionals],
      } as Parameters<Namespace['instantiateExclusiveLimitAlarm']>[1]);
      disableSelfEvaluation(alarm);
      this.alarms.set(kind, { alarm, kind, input: inputs[kind], shelf: null, suppressed: false });
    }
    for (const kind of ['stale', 'analyzer', 'model-health'] as const) {
      const alarm = ns.instantiateOffNormalAlarm({
        browseName: MIRRORED_ALARMS[kind].browseName,
        conditionName: MIRRORED_ALARMS[kind].browseName,
        componentOf: source,
        conditionSource: source,
        inputNode: inputs[kind],
        normalState: inputs.normal,
        maxTimeShelved: maxTimeShelvedMs,
        optionals: [...optionals],
      });
      disableSelfEvaluation(alarm);
      this.alarms.set(kind, { alarm, kind, input: inputs[kind], shelf: null, suppressed: false });
    }
    for (const m of this.alarms.values()) {
      m.alarm.on('acknowledged', (_eventId: unknown, comment: { text?: string | null } | null) => {
        const id = this.alarmIds.get(m.kind);
        if (id && onClientAcknowledge) onClientAcknowledge(id, comment?.text ?? '');
      });
      // SourceName: the unit id as Tideline spells it (not the namespace-qualified browse name)
      m.alarm.sourceName.setValueFromSource({ dataType: DataType.String, value: unitName });
      this.installShelving(m);
      const b = m.alarm.currentBranch();
      b.setActiveState(false);
      b.setAckedState(true);
      b.setSuppressedState(false);
      b.setRetain(false);
    }
  }

  /** Tideline owns shelving: refuse the OPC UA methods, read UnshelveTime from Tideline's shelve. */
  private installShelving(m: Mirrored): void {
    const sh = shelvingStateOf(m.alarm);
    for (const method of [sh.timedShelve, sh.oneShotShelve, sh.unshelve]) {
      if (!method) continue;
      // Executable = false: the server answers a call with BadNotExecutable before running it;
      // the bound function is a second refusal should that check ever be skipped.
      (method as unknown as { _getExecutableFlag: () => boolean })._getExecutableFlag = () => false;
      method.bindMethod((_args, _context, callback) => callback(null, { statusCode: StatusCodes.BadNotSupported }));
    }
    sh.unshelveTime?.bindVariable(
      {
        timestamped_get: () =>
          m.shelf
            ? new DataValue({ value: { dataType: DataType.Double, value: Math.max(0, m.shelf.until - this.now()) }, statusCode: StatusCodes.Good })
            : new DataValue({ value: { dataType: DataType.Double, value: 0 }, statusCode: StatusCodes.BadConditionNotShelved }),
      },
      true,
    );
    sh.setState('Unshelved');
  }

  /** Update a limit (HighLimit property) when the model's limit is known. */
  setLimit(kind: 't2' | 'q' | 'property', limit: number | null): void {
    const m = this.alarms.get(kind);
    if (!m || limit === null || !Number.isFinite(limit)) return;
    const a = m.alarm as unknown as { getHighLimit(): number; setHighLimit(v: number): void };
    if (a.getHighLimit() !== limit) a.setHighLimit(limit);
  }

  /** Mirror one Tideline alarm; returns true when an OPC UA event was raised. */
  mirror(summary: MirrorInput): boolean {
    const kind = (summary.kind in MIRRORED_ALARMS ? summary.kind : summary.key) as MirroredKind;
    const m = this.alarms.get(kind);
    if (!m) return false;
    if (summary.id) this.alarmIds.set(kind, summary.id);
    const alarm = m.alarm;
    const branch = alarm.currentBranch();
    const wasActive = branch.getActiveState();
    const wasAcked = branch.getAckedState();
    const active = summary.active;
    const acked = summary.state === 'active-acknowledged' || summary.state === 'normal';
    const shelf = summary.shelf ?? null;
    const suppressed = summary.suppressed ?? false;
    const shelfChanged = (m.shelf === null) !== (shelf === null) || (m.shelf !== null && shelf !== null && m.shelf.until !== shelf.until);
    const suppressedChanged = m.suppressed !== suppressed;
    if (wasActive === active && wasAcked === acked && !shelfChanged && !suppressedChanged) return false;
    const limitState = (alarm as unknown as { limitState?: { setState(s: string | null): void } }).limitState;
    if (wasActive !== active) {
      if (limitState) limitState.setState(active ? 'High' : null);
      branch.setActiveState(active);
      if (active) branch.setAckedState(false);
    }
    if (!active || acked) branch.setAckedState(acked);
    let note = '';
    if (shelfChanged) {
      m.shelf = shelf ? { ...shelf } : null;
      shelvingStateOf(alarm).setState(shelf ? 'TimedShelved' : 'Unshelved');
      note = shelf
        ? `shelved in Tideline until ${new Date(shelf.until).toISOString()}${shelf.by ? ` by ${shelf.by}` : ''}${shelf.reason ? `: ${shelf.reason}` : ''}`
        : 'shelve ended in Tideline';
      branch.setComment(note);
      branch.setClientUserId(shelf?.by ?? 'tideline');
    }
    if (suppressedChanged) {
      m.suppressed = suppressed;
      branch.setSuppressedState(suppressed);
      if (!note) note = suppressed ? 'suppressed by design in Tideline' : 'suppression ended in Tideline';
    }
    branch.setRetain(active || !acked);
    const text = summary.message || `${summary.key} ${active ? 'active' : 'cleared'}`;
    alarm.raiseNewCondition({
      message: note ? `${text} (${note})` : text,
      severity: severityOf(summary.priority),
      quality: StatusCodes.Good,
      retain: active || !acked,
      time: new Date(summary.t),
    });
    return true;
  }

  /** ShelvingState/CurrentState as mirrored ('Unshelved' or 'TimedShelved'). */
  shelvingState(kind: MirroredKind): string | null {
    const m = this.alarms.get(kind);
    return m ? shelvingStateOf(m.alarm).getCurrentState() : null;
  }

  isActive(kind: MirroredKind): boolean {
    return this.alarms.get(kind)?.alarm.currentBranch().getActiveState() ?? false;
  }
}
