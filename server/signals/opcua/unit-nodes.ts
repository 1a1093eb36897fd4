/**
 * One unit's folder in the OPC UA address space (Objects/Tideline/<unit>) and how a
 * UnitSignalState is written into it. Variable names are Tideline's own (docs/signals.md).
 */
import {
  DataType,
  StatusCodes,
  Variant,
  standardUnits,
  type Namespace,
  type StatusCode,
  type UAObject,
  type UAVariable,
} from 'node-opcua';
import type { UnitSignalState } from '../unit-state.ts';
import { UnitAlarmMirror } from './alarm-mirror.ts';
import { analyzerStatusSignal, liveValueStatus, ne107Code } from './status-codes.ts';

export interface UnitNodeOptions {
  propertyRange: { low: number; high: number };
  maxTimeShelvedMs: number;
  /** Clock (ms epoch) for UnshelveTime; default Date.now. */
  now?: () => number;
  /** The DCS wrote true to EndpointAcknowledge. */
  onAcknowledge: (unit: string) => void;
  /** A client acknowledged an alarm condition. */
  onAlarmAcknowledge?: (unit: string, alarmId: string, comment: string) => void;
}

type Vars = {
  batchId: UAVariable;
  batchActive: UAVariable;
  product: UAVariable;
  progress: UAVariable;
  endpointState: UAVariable;
  endpointReached: UAVariable;
  endpointAck: UAVariable;
  endpointTime: UAVariable;
  endpointReason: UAVariable;
  endpointEta: UAVariable;
  endpointHeld: UAVariable;
  endpointHoldReasons: UAVariable;
  property: UAVariable;
  propertyName: UAVariable;
  t2: UAVariable;
  t2Limit: UAVariable;
  q: UAVariable;
  qLimit: UAVariable;
  modelVersion: UAVariable;
  heartbeat: UAVariable;
  analyzerStatus: UAVariable;
  analyzerStatusText: UAVariable;
  quality: UAVariable;
  dataStale: UAVariable;
  analyzerFault: UAVariable;
  modelHealth: UAVariable;
  activeAlarms: UAVariable;
};

export class UnitNodes {
  readonly object: UAObject;
  readonly vars: Vars;
  readonly alarms: UnitAlarmMirror;
  private latched = false;

  constructor(
    ns: Namespace,
    parent: UAObject,
    notifier: UAObject,
    readonly unit: string,
    opts: UnitNodeOptions,
  ) {
    this.object = ns.addObject({ browseName: unit, organizedBy: parent, eventSourceOf: notifier, eventNotifier: 1, description: `Tideline signals for unit ${unit}` });
    const o = this.object;
    const v = (browseName: string, dataType: DataType, value: unknown, description: string): UAVariable => {
      const node = ns.addVariable({ componentOf: o, browseName, dataType, description, minimumSamplingInterval: 100 });
      node.setValueFromSource(new Variant({ dataType, value }), StatusCodes.Good);
      return node;
    };
    const progress = ns.addAnalogDataItem({
      componentOf: o,
      browseName: 'Progress',
      dataType: 'Double',
      engineeringUnitsRange: { low: 0, high: 100 },
      engineeringUnits: standardUnits.percent,
      description: 'Batch progress against the golden batch, %',
      minimumSamplingInterval: 100,
    });
    const property = ns.addAnalogDataItem({
      componentOf: o,
      browseName: 'Property',
      dataType: 'Double',
      engineeringUnitsRange: opts.propertyRange,
      engineeringUnits: standardUnits.percent,
      description: 'Predicted property (PLS), e.g. moisture % w/w',
      minimumSamplingInterval: 100,
    });
    this.vars = {
      batchId: v('BatchId', DataType.String, '', 'Id of the current (or last) batch'),
      batchActive: v('BatchActive', DataType.Boolean, false, 'True while a batch runs'),
      product: v('Product', DataType.String, '', 'Product of the current batch'),
      progress,
      endpointState: v('EndpointState', DataType.String, '', 'running, nearing, settling, held, done, signalled'),
      endpointReached: v('EndpointReached', DataType.Boolean, false, 'Latched true when the endpoint is reached, until the DCS writes EndpointAcknowledge = true'),
      endpointAck: ns.addVariable({
        componentOf: o,
        browseName: 'EndpointAcknowledge',
        dataType: 'Boolean',
        description: 'Write true to acknowledge EndpointReached (resets the latch); reads false',
        accessLevel: 'CurrentRead | CurrentWrite',
        minimumSamplingInterval: 100,
        userAccessLevel: 'CurrentRead | CurrentWrite',
        value: {
          get: () => new Variant({ dataType: DataType.Boolean, value: false }),
          set: (variant: Variant): StatusCode => {
            if (variant.dataType !== DataType.Boolean) return StatusCodes.BadTypeMismatch;
            if (variant.value === true) opts.onAcknowledge(unit);
            return StatusCodes.Good;
          },
        },
      }),
      endpointTime: v('EndpointTime', DataType.DateTime, null, 'When the endpoint was reached (UTC, the spectrum time)'),
      endpointReason: v('EndpointReason', DataType.String, '', 'Why: the endpoint criteria that were met'),
      endpointEta: v('EndpointEtaMin', DataType.Double, 0, 'Estimated minutes to the endpoint (median); Bad when unknown'),
      endpointHeld: v('EndpointHeld', DataType.Boolean, false, 'True while the endpoint rule is met and confirmed but a guard holds it (minimum time, a standing alarm, a prediction outside its calibration): not an endpoint'),
      endpointHoldReasons: v('EndpointHoldReasons', DataType.String, '', 'While held: every guard that holds the endpoint, one per line as code: text (codes min-elapsed, alarm, extrapolating); empty otherwise'),
      property,
      propertyName: v('PropertyName', DataType.String, '', 'Name and unit of the predicted property'),
      t2: v('T2', DataType.Double, 0, "Hotelling's T² of the latest spectrum"),
      t2Limit: v('T2Limit', DataType.Double, 0, 'Control limit of T² at the model confidence'),
      q: v('Q', DataType.Double, 0, 'Q (SPE) of the latest spectrum'),
      qLimit: v('QLimit', DataType.Double, 0, 'Control limit of Q at the model confidence'),
      modelVersion: v('ModelVersion', DataType.String, '', 'Monitoring model version judging the batch'),
      heartbeat: v('Heartbeat', DataType.UInt32, 0, 'Counts up about once a second while Tideline runs'),
      analyzerStatus: v('AnalyzerStatus', DataType.Byte, 0, 'NAMUR NE 107: 0 good, 1 failure, 2 function check, 3 out of specification, 4 maintenance required; 1 with BadNoCommunication while Tideline receives no spectrum (data stale, see Quality)'),
      analyzerStatusText: v('AnalyzerStatusText', DataType.String, 'good', 'NAMUR NE 107 category in words (status code as AnalyzerStatus)'),
      quality: v('Quality', DataType.String, 'no data yet', 'Why the live values are Uncertain or Bad (empty when Good)'),
      dataStale: v('DataStale', DataType.Boolean, false, 'True while no spectrum arrives (input of the DataStale alarm)'),
      analyzerFault: v('AnalyzerFaultActive', DataType.Boolean, false, 'True while the analyzer reports a fault (input of the AnalyzerFault alarm)'),
      modelHealth: v('ModelHealthFailing', DataType.Boolean, false, 'True while a health test of the deployed model version fails (input of the ModelHealth alarm)'),
      activeAlarms: v('ActiveAlarms', DataType.UInt32, 0, 'Number of Tideline alarms active or unacknowledged on this unit'),
    };
    for (const n of [this.vars.progress, this.vars.property, this.vars.t2, this.vars.q, this.vars.t2Limit, this.vars.qLimit]) {
      n.setValueFromSource(new Variant({ dataType: DataType.Double, value: 0 }), StatusCodes.BadWaitingForInitialData);
    }
    const normal = ns.addVariable({ componentOf: o, browseName: 'NormalState', dataType: 'Boolean', description: 'Normal value of DataStale / AnalyzerFaultActive / ModelHealthFailing' });
    normal.setValueFromSource(new Variant({ dataType: DataType.Boolean, value: false }));
    this.alarms = new UnitAlarmMirror(ns, o, { t2: this.vars.t2, q: this.vars.q, property: this.vars.property, stale: this.vars.dataStale, analyzer: this.vars.analyzerFault, 'model-health': this.vars.modelHealth, normal }, opts.maxTimeShelvedMs, unit, (id, comment) => opts.onAlarmAcknowledge?.(unit, id, comment), opts.now);
  }

  private set(node: UAVariable, dataType: DataType, value: unknown, status: StatusCode = StatusCodes.Good, t?: number): void {
    const cur = node.readValue();
    const same = cur.statusCode.equals(status) && (cur.value.value === value || (value instanceof Date && cur.value.value instanceof Date && cur.value.value.getTime() === value.getTime()));
    if (same) return;
    node.setValueFromSource(new Variant({ dataType, value }), status, t !== undefined ? new Date(t) : new Date());
  }

  /** Write the unit state (values, status codes, latch, alarms). */
  update(s: UnitSignalState, latch: { reached: boolean; t: number | null; reason: string | null }): void {
    const V = this.vars;
    const live = liveValueStatus(s);
    const t = s.resultT ?? undefined;
    this.set(V.batchId, DataType.String, s.batch ?? '');
    this.set(V.batchActive, DataType.Boolean, s.batchActive);
    this.set(V.product, DataType.String, s.product ?? '');
    this.set(V.progress, DataType.Double, s.progress === null ? 0 : s.progress * 100, s.progress === null ? StatusCodes.BadWaitingForInitialData : live, t);
    this.set(V.endpointState, DataType.String, s.endpoint.state ?? '');
    this.latched = latch.reached;
    this.set(V.endpointReached, DataType.Boolean, latch.reached);
    this.set(V.endpointTime, DataType.DateTime, latch.t === null ? null : new Date(latch.t), latch.t === null ? StatusCodes.BadWaitingForInitialData : StatusCodes.Good);
    this.set(V.endpointReason, DataType.String, latch.reason ?? '');
    this.set(V.endpointEta, DataType.Double, s.endpoint.etaMin ?? 0, s.endpoint.etaMin === null ? StatusCodes.BadWaitingForInitialData : live, t);
    const holds = s.endpoint.state === 'held' ? s.endpoint.holds : [];
    this.set(V.endpointHeld, DataType.Boolean, holds.length > 0);
    this.set(V.endpointHoldReasons, DataType.String, holds.map((h) => `${h.code}: ${h.text}`).join('\n'));
    const pred = s.prediction;
    this.set(V.property, DataType.Double, pred ? pred.value : 0, pred ? (pred.extrapolating && live === StatusCodes.Good ? StatusCodes.UncertainSubNormal : live) : StatusCodes.BadWaitingForInitialData, t);
    this.set(V.propertyName, DataType.String, pred ? `${pred.name} (${pred.unit})` : '');
    this.set(V.t2, DataType.Double, s.t2 ?? 0, s.t2 === null ? StatusCodes.BadWaitingForInitialData : live, t);
    this.set(V.q, DataType.Double, s.q ?? 0, s.q === null ? StatusCodes.BadWaitingForInitialData : live, t);
    this.set(V.t2Limit, DataType.Double, s.t2Limit ?? 0, s.t2Limit === null ? StatusCodes.BadWaitingForInitialData : StatusCodes.Good);
    this.set(V.qLimit, DataType.Double, s.qLimit ?? 0, s.qLimit === null ? StatusCodes.BadWaitingForInitialData : StatusCodes.Good);
    this.alarms.setLimit('t2', s.t2Limit);
    this.alarms.setLimit('q', s.qLimit);
    this.set(V.modelVersion, DataType.String, s.modelVersion ?? '');
    const analyzer = analyzerStatusSignal(s);
    this.set(V.analyzerStatus, DataType.Byte, ne107Code(analyzer.status), analyzer.code);
    this.set(V.analyzerStatusText, DataType.String, analyzer.status, analyzer.code);
    this.set(V.quality, DataType.String, s.qualityReason ?? '');
    this.set(V.dataStale, DataType.Boolean, s.stale);
    this.set(V.analyzerFault, DataType.Boolean, s.analyzer === 'failure');
    this.set(V.modelHealth, DataType.Boolean, s.alarms.some((a) => a.kind === 'model-health' && a.active));
    this.set(V.activeAlarms, DataType.UInt32, s.alarms.filter((a) => a.active || a.state !== 'normal').length);
  }

  isLatched(): boolean {
    return this.latched;
  }

  beat(n: number): void {
    this.vars.heartbeat.setValueFromSource(new Variant({ dataType: DataType.UInt32, value: n >>> 0 }), StatusCodes.Good);
  }
}
