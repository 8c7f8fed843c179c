// The service's own health and load, in the Prometheus text format at /metrics.
import { Counter, Gauge, Histogram, Registry, collectDefaultMetrics } from 'prom-client';
import { afterFullGc } from './heap-after-gc';

export function createMetrics() {
  const registry = new Registry();
  collectDefaultMetrics({ register: registry, prefix: 'whitecap_process_' });
  afterFullGc();
  new Gauge({
    name: 'whitecap_process_old_generation_after_full_gc_bytes',
    help: 'V8 old generation in use right after the last full (mark-compact) collection: what the service keeps',
    registers: [registry],
    collect() {
      const v = afterFullGc().oldGenerationBytes;
      if (Number.isFinite(v)) this.set(v);
    },
  });
  return {
    registry,
    messagesIn: new Counter({ name: 'whitecap_messages_in_total', help: 'MQTT innovation messages received', registers: [registry] }),
    samplesIn: new Counter({ name: 'whitecap_samples_in_total', help: 'Innovation samples received (batch messages count each sample)', registers: [registry] }),
    samplesStored: new Counter({ name: 'whitecap_samples_stored_total', help: 'Innovation samples committed to PostgreSQL', registers: [registry] }),
    duplicates: new Counter({ name: 'whitecap_samples_duplicate_total', help: 'Samples dropped as duplicates of one already stored', registers: [registry] }),
    quarantined: new Counter({
      name: 'whitecap_quarantined_total',
      help: 'Payloads or samples put in quarantine, by reason',
      labelNames: ['reason'] as const,
      registers: [registry],
    }),
    refused: new Counter({
      name: 'whitecap_publish_refused_total',
      help: 'Publishes refused by the broker, by reason',
      labelNames: ['reason'] as const,
      registers: [registry],
    }),
    rateLimited: new Counter({
      name: 'whitecap_samples_rate_limited_total',
      help: "Samples quarantined (rate_limit) because their unit sent more than its per-unit rate and burst allow",
      registers: [registry],
    }),
    held: new Counter({
      name: 'whitecap_publish_held_total',
      help: 'Publishes held back (read no further, acknowledged later) while the write queue was full',
      registers: [registry],
    }),
    messageSeconds: new Histogram({
      name: 'whitecap_message_commit_seconds',
      help: 'Time from an MQTT message reaching the broker to its samples being committed (when it is acknowledged)',
      buckets: [0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10],
      registers: [registry],
    }),
    batchSamples: new Histogram({
      name: 'whitecap_write_batch_samples',
      help: 'Samples per committed batch',
      buckets: [1, 10, 50, 100, 500, 1000, 2000, 5000],
      registers: [registry],
    }),
    batchSeconds: new Histogram({
      name: 'whitecap_write_batch_seconds',
      help: 'Time to commit one batch',
      buckets: [0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5],
      registers: [registry],
    }),
    commitPhaseSeconds: new Counter({
      name: 'whitecap_write_phase_seconds_total',
      help: 'Wall time of the database writer by phase of its transactions (waits for the event loop included)',
      labelNames: ['phase'] as const,
      registers: [registry],
    }),
    queueDepth: new Gauge({ name: 'whitecap_write_queue_samples', help: 'Samples waiting to be committed', registers: [registry] }),
    checkSeconds: new Histogram({
      name: 'whitecap_check_seconds',
      help: 'Time to parse, validate and check one message',
      buckets: [0.00001, 0.00005, 0.0001, 0.0005, 0.001, 0.005, 0.01],
      registers: [registry],
    }),
    alertsOpened: new Counter({ name: 'whitecap_alerts_opened_total', help: 'Alerts opened, by rule', labelNames: ['rule'] as const, registers: [registry] }),
    estimatorsLive: new Gauge({ name: 'whitecap_estimators_streaming', help: 'Estimators with checks in memory', registers: [registry] }),
    partitionsClaimed: new Gauge({ name: 'whitecap_partitions_claimed', help: 'Partitions of the fleet this worker holds (partitioned workers)', registers: [registry] }),
    partitionReleases: new Counter({
      name: 'whitecap_partition_releases_total',
      help: 'Partitions this worker let go of, by reason (rebalance, shutdown, lost)',
      labelNames: ['reason'] as const,
      registers: [registry],
    }),
  };
}

export type Metrics = ReturnType<typeof createMetrics>;
