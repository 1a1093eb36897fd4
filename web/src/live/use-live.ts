import { useEffect, useRef, useState } from 'preact/hooks';
import type { LiveScope, LiveServerMessage } from '../../../core/api/live.ts';
import type { Changes, LiveState } from './live-state.ts';
import { applyLive, createLiveState, mergeResults, setBatch } from './live-state.ts';
import type { ConnectionState } from './live-socket.ts';
import { LiveSocket } from './live-socket.ts';
import { api } from '../api/endpoints.ts';

export interface LiveHandle {
  state: LiveState;
  connection: ConnectionState;
  /** Bumped (at most once per animation frame) when something other than the series changed. */
  version: number;
  /** Listeners called once per animation frame when series changed (charts update without a re-render). */
  onSeries: Set<() => void>;
}

/**
 * Subscribe to a /live scope. Structural changes (units, alarms, endpoint, batch) re-render the
 * view; series changes only call `onSeries` listeners, so charts redraw without a virtual-DOM pass.
 */
export function useLive(scope: LiveScope | null, maxResults?: number): LiveHandle {
  const stateRef = useRef<LiveState>(createLiveState());
  const seriesListeners = useRef(new Set<() => void>());
  const [version, setVersion] = useState(0);
  const [connection, setConnection] = useState<ConnectionState>('connecting');
  const key = scope ? JSON.stringify(scope) : '';

  useEffect(() => {
    if (!scope) return;
    const s = createLiveState();
    stateRef.current = s;
    let pending: Changes | null = null;
    let frame = 0;
    let fetchingGap = false;
    let fetchingBatch = false;
    const flush = () => {
      frame = 0;
      const c = pending!;
      pending = null;
      if (c.series) seriesListeners.current.forEach((f) => f());
      if (c.units || c.alarms || c.batch || c.endpoint) setVersion((v) => v + 1);
      if (s.lostMessages) sock.resubscribe();
      if (s.pendingBatch && !fetchingBatch) {
        const id = s.pendingBatch;
        fetchingBatch = true;
        api.batch(id).then(
          (b) => {
            fetchingBatch = false;
            if (setBatch(s, b)) schedule({ units: false, alarms: false, batch: true, series: false, endpoint: false });
          },
          () => {
            fetchingBatch = false;
          },
        );
      }
      if (s.gaps.length && s.batch && !fetchingGap) {
        const g = s.gaps.shift()!;
        fetchingGap = true;
        api.results(s.batch.id, { fromSeq: g.fromSeq, toSeq: g.toSeq }).then(
          (r) => {
            fetchingGap = false;
            mergeResults(s, r.items);
            schedule({ units: false, alarms: false, batch: false, series: true, endpoint: false });
          },
          () => {
            fetchingGap = false;
          },
        );
      }
    };
    const schedule = (c: Changes) => {
      pending = pending ? { units: pending.units || c.units, alarms: pending.alarms || c.alarms, batch: pending.batch || c.batch, series: pending.series || c.series, endpoint: pending.endpoint || c.endpoint } : c;
      if (!frame) frame = requestAnimationFrame(flush);
    };
    const sock = new LiveSocket({
      scope,
      maxResults,
      onMessage: (m: LiveServerMessage) => {
        if (m.type === 'welcome') s.subscription = sock.subscriptionId;
        schedule(applyLive(s, m));
      },
      onState: setConnection,
    });
    s.subscription = sock.subscriptionId;
    return () => {
      sock.close();
      if (frame) cancelAnimationFrame(frame);
    };
    // eslint-disable-next-line react-hooks/exhaustive-deps
  }, [key]);

  return { state: stateRef.current, connection, version, onSeries: seriesListeners.current };
}
