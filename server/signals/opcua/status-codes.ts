/**
 * OPC UA status codes (IEC 62541-4 §7.34 StatusCode, -8 DataAccess) for Tideline's live values.
 */
import { StatusCodes, type StatusCode } from 'node-opcua';
import type { UnitSignalState } from '../unit-state.ts';

/** The status code for the unit's live values (progress, T², Q, predicted property). */
export function liveValueStatus(s: UnitSignalState): StatusCode {
  if (s.resultT === null) return StatusCodes.BadWaitingForInitialData;
  if (s.analyzer === 'failure') return StatusCodes.BadSensorFailure; // NE 107 F
  if (s.analyzer === 'function-check') return StatusCodes.BadOutOfService; // NE 107 C: output temporarily invalid
  if (s.stale) return StatusCodes.UncertainLastUsableValue; // "whatever was updating this value has stopped"
  if (s.analyzer === 'out-of-specification') return StatusCodes.UncertainSensorNotAccurate; // NE 107 S
  if (s.quality === 'uncertain') return StatusCodes.UncertainSubNormal; // outside the model / extrapolating
  return StatusCodes.Good;
}

/**
 * What the AnalyzerStatus variables show. The analyzer's own NE 107 report (or failure while one of
 * Tideline's analyzer alarms stands) with Good — unless Tideline itself receives no spectrum (its
 * stale-data alarm stands: a batch runs and nothing arrived within ingest.staleAfterMs). Then the
 * report is out of date and the analyzer gives no usable output: failure (NE 107 F, "output signal
 * invalid"), with BadNoCommunication so that a client can tell Tideline's conclusion from the
 * analyzer's own report; the Quality variable says why. Our choice; NE 107 itself does not cover a
 * silent device. An analyzer in function check has announced its silence (e.g. probe cleaning):
 * it stays function check, as the suppression of the stale-data alarm does.
 */
export function analyzerStatusSignal(s: UnitSignalState): { status: UnitSignalState['analyzer']; code: StatusCode } {
  if (s.stale && s.analyzer !== 'function-check') return { status: 'failure', code: StatusCodes.BadNoCommunication };
  return { status: s.analyzer, code: StatusCodes.Good };
}

/** NAMUR NE 107 category as a number for a DCS: 0 good, 1 failure, 2 function check, 3 out of specification, 4 maintenance required. */
export function ne107Code(s: UnitSignalState['analyzer']): number {
  return { good: 0, failure: 1, 'function-check': 2, 'out-of-specification': 3, 'maintenance-required': 4 }[s];
}

/** OPC UA severity (1…1000, IEC 62541-9 §5.5.2) for Tideline priorities 1…4 (1 highest). Common practice, no published mapping. */
export function severityOf(priority: number): number {
  return ({ 1: 900, 2: 700, 3: 500, 4: 300 } as Record<number, number>)[priority] ?? 500;
}
