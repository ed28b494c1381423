/**
 * Every metric family modewatch exposes, in one place. Names follow the Prometheus
 * naming guidelines (https://prometheus.io/docs/practices/naming/): one prefix,
 * snake_case, base units in the name, `_total` for counters, no target-like labels.
 *
 * Location and spread are published in the stream's base unit: a stream that declares
 * `unit: milliseconds` is converted to seconds and appears in the `_seconds` family,
 * `bytes`/`kilobytes`/... in `_bytes`, and a stream without a unit in the bare family.
 */
export const PREFIX = 'modewatch';

export const METRICS = {
  // Model read-outs, computed at scrape time from the monitors.
  componentWeight: 'modewatch_component_weight', // {stream, component} 0..1, current model
  referenceWeight: 'modewatch_reference_component_weight', // {stream, component} 0..1, reference model
  componentLocation: 'modewatch_component_location', // {stream, component} (+ _seconds / _bytes)
  componentSpread: 'modewatch_component_spread', // {stream, component} (+ _seconds / _bytes)
  streamComponents: 'modewatch_stream_components', // {stream}
  streamShiftScore: 'modewatch_stream_shift_score', // {stream} largest statistic / threshold (>= 1: over threshold)
  streamLogLikelihood: 'modewatch_stream_log_likelihood_per_event', // {stream} current fit, nats per event
  alertActive: 'modewatch_alert_active', // {stream, kind, state="pending"|"firing"} count
  streamEvents: 'modewatch_stream_events_total', // {stream}
  streamLastEventTs: 'modewatch_stream_last_event_timestamp_seconds', // {stream}

  // Daemon health.
  eventsTotal: 'modewatch_events_total', // all accepted events
  rejectedTotal: 'modewatch_rejected_events_total', // {reason}
  streams: 'modewatch_streams', // number of streams held
  streamsRefusedTotal: 'modewatch_streams_refused_total', // events refused because the stream cap was reached
  alertTransitionsTotal: 'modewatch_alert_transitions_total', // {kind, state}
  consumerLag: 'modewatch_consumer_lag_records', // {topic, partition}
  processingSeconds: 'modewatch_batch_processing_seconds_total', // time spent processing batches
  checkpointAge: 'modewatch_checkpoint_age_seconds', // since the last successful checkpoint
  checkpointFailuresTotal: 'modewatch_checkpoint_failures_total',
  sinkDeliveredTotal: 'modewatch_sink_delivered_total', // {sink}
  sinkFailuresTotal: 'modewatch_sink_delivery_failures_total', // {sink}
  sinkDroppedTotal: 'modewatch_sink_dropped_total', // {sink} (queue full)
  sinkQueueLength: 'modewatch_sink_queue_length', // {sink}
  scrapeSeconds: 'modewatch_scrape_duration_seconds', // time to render the previous scrape
  buildInfo: 'modewatch_build_info', // {version, node_version} = 1
  ready: 'modewatch_ready', // 1 when the consumer joined and state is restored
} as const;

/** Units a stream may declare, and how each maps to a base unit (Prometheus wants base units). */
export const UNIT_FACTORS: Record<string, { base: 'seconds' | 'bytes'; factor: number }> = {
  seconds: { base: 'seconds', factor: 1 },
  milliseconds: { base: 'seconds', factor: 1e-3 },
  microseconds: { base: 'seconds', factor: 1e-6 },
  nanoseconds: { base: 'seconds', factor: 1e-9 },
  bytes: { base: 'bytes', factor: 1 },
  kilobytes: { base: 'bytes', factor: 1e3 },
  megabytes: { base: 'bytes', factor: 1e6 },
  kibibytes: { base: 'bytes', factor: 1024 },
  mebibytes: { base: 'bytes', factor: 1024 * 1024 },
};
