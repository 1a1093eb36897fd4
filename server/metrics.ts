/** Prometheus metrics (prom-client), one registry per server instance. */
import client from 'prom-client';

export function createMetrics() {
  const registry = new client.Registry();
  client.collectDefaultMetrics({ register: registry, prefix: 'tideline_process_' });
  const m = {
    registry,
    spectra: new client.Counter({ name: 'tideline_ingest_spectra_total', help: 'Spectra stored and acked', registers: [registry] }),
    entries: new client.Counter({ name: 'tideline_ingest_entries_total', help: 'Log entries accepted (spectra, batch-start, batch-end)', labelNames: ['type'], registers: [registry] }),
    duplicates: new client.Counter({ name: 'tideline_ingest_duplicates_total', help: 'Entries received again and acked without storing', registers: [registry] }),
    errors: new client.Counter({ name: 'tideline_ingest_errors_total', help: 'Error frames sent to analyzers', labelNames: ['code'], registers: [registry] }),
    ackLatency: new client.Histogram({
      name: 'tideline_ingest_ack_latency_seconds',
      help: 'Time from receiving a spectrum to sending its ack (after the durable commit)',
      buckets: [0.001, 0.002, 0.005, 0.01, 0.02, 0.05, 0.1, 0.25, 0.5, 1, 2.5],
      registers: [registry],
    }),
    commitSeconds: new client.Histogram({
      name: 'tideline_storage_group_commit_seconds',
      help: 'Duration of one group commit',
      buckets: [0.0005, 0.001, 0.002, 0.005, 0.01, 0.02, 0.05, 0.1, 0.5],
      registers: [registry],
    }),
    commitEntries: new client.Histogram({
      name: 'tideline_storage_group_commit_entries',
      help: 'Entries per group commit',
      buckets: [1, 2, 5, 10, 20, 50, 100, 200, 500, 1000, 2000],
      registers: [registry],
    }),
    ingestConnections: new client.Gauge({ name: 'tideline_ingest_connections', help: 'Open analyzer connections', registers: [registry] }),
    liveConnections: new client.Gauge({ name: 'tideline_live_connections', help: 'Open live (browser) connections', registers: [registry] }),
    signalGaps: new client.Counter({ name: 'tideline_signal_gaps_total', help: 'Gaps in a unit\'s outbox seq that a signal channel went past after waiting (never expected: rows commit in seq order)', labelNames: ['channel'], registers: [registry] }),
    liveDropped: new client.Counter({ name: 'tideline_live_results_dropped_total', help: 'Live result messages dropped for slow clients (replaced by gap notices)', registers: [registry] }),
    activeAlarms: new client.Gauge({ name: 'tideline_alarms_active', help: 'Alarms not in state normal', labelNames: ['state'], registers: [registry] }),
  };
  return m;
}
export type Metrics = ReturnType<typeof createMetrics>;
