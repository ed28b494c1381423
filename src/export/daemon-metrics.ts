/**
 * The daemon's own health metrics, on prom-client 15 (a few dozen series, so its convenience
 * costs nothing here). Every value is read at scrape time through collect callbacks from the
 * registry and the DaemonHealth the daemon implements; nothing is pushed on the event path.
 *
 * Process metrics: prom-client's default set (CPU, resident memory, open fds, heap, GC,
 * event-loop delay) is registered under the `modewatch_` prefix, so every series the daemon
 * exposes shares one prefix (metric-names.ts) and cannot collide with another exporter's
 * `process_*` in a shared job. Event-loop delay is the first thing to read when scrapes or
 * event processing slow down, which is why the set is on by default.
 */
import { readFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { collectDefaultMetrics, Counter, Gauge, Registry } from 'prom-client';
import { ALERT_KINDS } from '../detect/alert.js';
import { DECODE_REJECTIONS } from '../ingest/event.js';
import { VALUE_REJECTIONS } from '../math/reject.js';
import type { RejectionReason, StreamRegistry } from '../streams/stream-registry.js';
import { splitPartitionName, type DaemonHealth, type TransitionKey } from './daemon-health.js';
import { METRICS, PREFIX } from './metric-names.js';

/** Every rejection reason: label values of modewatch_rejected_events_total, all present from the start. */
export const REJECTION_REASONS: readonly RejectionReason[] = [...new Set<RejectionReason>([...DECODE_REJECTIONS, ...VALUE_REJECTIONS, 'stream_limit'])];

export interface DaemonMetricsOptions {
  /** Version for modewatch_build_info (default: the package.json next to the code). */
  version?: string;
  /** Register prom-client's process and Node.js metrics under the modewatch_ prefix (default true). */
  processMetrics?: boolean;
}

/** The package version, from the package.json above this file (src/export or dist/export). */
export function packageVersion(): string {
  let dir = dirname(fileURLToPath(import.meta.url));
  for (let i = 0; i < 4; i++) {
    try {
      const pkg = JSON.parse(readFileSync(join(dir, 'package.json'), 'utf8')) as { name?: string; version?: string };
      if (pkg.name === 'modewatch' && typeof pkg.version === 'string') return pkg.version;
    } catch {
      // not here: look one level up
    }
    dir = dirname(dir);
  }
  return 'unknown';
}

export class DaemonMetrics {
  readonly promRegistry = new Registry();
  /** Seconds the previous full scrape took to render (set by the caller after each render). */
  lastScrapeSeconds = 0;

  constructor(registry: StreamRegistry, health: DaemonHealth, options: DaemonMetricsOptions = {}) {
    const registers = [this.promRegistry];
    const self = this;
    const version = options.version ?? packageVersion();

    new Counter({
      name: METRICS.eventsTotal,
      help: 'Events accepted into stream models, all streams.',
      registers,
      collect() {
        this.reset();
        this.inc(registry.accepted);
      },
    });
    new Counter({
      name: METRICS.rejectedTotal,
      help: 'Input records refused, by reason (decoding, value domain, stream cap).',
      labelNames: ['reason'],
      registers,
      collect() {
        this.reset();
        for (const r of REJECTION_REASONS) this.inc({ reason: r }, registry.rejections.get(r) ?? 0);
        for (const [r, n] of registry.rejections) if (!REJECTION_REASONS.includes(r)) this.inc({ reason: r }, n);
      },
    });
    new Gauge({
      name: METRICS.streams,
      help: 'Streams held (each with its own model).',
      registers,
      collect() {
        this.set(registry.size);
      },
    });
    new Counter({
      name: METRICS.streamsRefusedTotal,
      help: 'Events refused because the stream cap was reached.',
      registers,
      collect() {
        this.reset();
        this.inc(registry.refusedByCap);
      },
    });
    new Counter({
      name: METRICS.alertTransitionsTotal,
      help: 'Alert transitions published, by kind and state (firing, resolved).',
      labelNames: ['kind', 'state'],
      registers,
      collect() {
        this.reset();
        const t = health.transitions();
        for (const kind of ALERT_KINDS) {
          for (const state of ['firing', 'resolved'] as const) this.inc({ kind, state }, t.get(`${kind}/${state}` as TransitionKey) ?? 0);
        }
      },
    });
    new Gauge({
      name: METRICS.consumerLag,
      help: 'Records between the committed position and the end of each assigned partition.',
      labelNames: ['topic', 'partition'],
      registers,
      collect() {
        this.reset();
        for (const [name, lag] of health.lag()) this.set(splitPartitionName(name), lag);
      },
    });
    new Counter({
      name: METRICS.processingSeconds,
      help: 'Wall-clock seconds spent processing event batches.',
      registers,
      collect() {
        this.reset();
        this.inc(Math.max(0, health.processingSeconds()));
      },
    });
    new Gauge({
      name: METRICS.checkpointAge,
      help: 'Seconds since the last successful checkpoint of model state and source positions (absent when checkpointing is off).',
      registers,
      collect() {
        const age = health.checkpointAgeSeconds();
        if (age === null) this.remove({});
        else this.set(age);
      },
    });
    new Counter({
      name: METRICS.checkpointFailuresTotal,
      help: 'Checkpoints that failed to be written.',
      registers,
      collect() {
        this.reset();
        this.inc(health.checkpointFailures());
      },
    });
    const sinkCounter = (name: string, help: string, read: (s: ReturnType<ReturnType<DaemonHealth['sinks']>[number]['stats']>) => number) =>
      new Counter({
        name,
        help,
        labelNames: ['sink'],
        registers,
        collect() {
          this.reset();
          for (const s of health.sinks()) this.inc({ sink: s.name }, read(s.stats()));
        },
      });
    sinkCounter(METRICS.sinkDeliveredTotal, 'Alert transitions delivered by each sink.', (s) => s.delivered);
    sinkCounter(METRICS.sinkFailuresTotal, 'Alert transitions a sink gave up on after its last attempt.', (s) => s.failed);
    sinkCounter(METRICS.sinkDroppedTotal, 'Alert transitions a sink threw away unsent (queue full or shutdown).', (s) => s.dropped);
    new Gauge({
      name: METRICS.sinkQueueLength,
      help: 'Alert transitions waiting or in flight in each sink.',
      labelNames: ['sink'],
      registers,
      collect() {
        this.reset();
        for (const s of health.sinks()) this.set({ sink: s.name }, s.stats().queueLength);
      },
    });
    new Gauge({
      name: METRICS.scrapeSeconds,
      help: 'Seconds the previous scrape of this endpoint took to render.',
      registers,
      collect() {
        this.set(self.lastScrapeSeconds);
      },
    });
    const build = new Gauge({
      name: METRICS.buildInfo,
      help: 'Always 1; labels carry the modewatch version and the Node.js version.',
      labelNames: ['version', 'node_version'],
      registers,
    });
    build.set({ version, node_version: process.version }, 1);
    new Gauge({
      name: METRICS.ready,
      help: '1 when the consumer joined its group and the state of its partitions is restored, else 0.',
      registers,
      collect() {
        this.set(health.ready() ? 1 : 0);
      },
    });
    if (options.processMetrics ?? true) {
      collectDefaultMetrics({ register: this.promRegistry, prefix: `${PREFIX}_` });
      // prom-client names three gauges *_total, which the naming rules keep for counters (promtool
      // check metrics reports them); the same numbers are in nodejs_active_{handles,requests,resources}.
      for (const n of ['nodejs_active_handles_total', 'nodejs_active_requests_total', 'nodejs_active_resources_total']) {
        this.promRegistry.removeSingleMetric(`${PREFIX}_${n}`);
      }
    }
  }

  async render(): Promise<string> {
    // prom-client 15.1.3 writes NaN as "Nan" (e.g. the event-loop delay before its first sample);
    // the text format spells it "NaN". Prometheus takes either, stricter readers do not.
    return (await this.promRegistry.metrics()).replace(/ Nan$/gm, ' NaN');
  }
}
