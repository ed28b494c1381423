/**
 * The whole /metrics body: the daemon's health families (prom-client) followed by the model
 * families (written directly). The two sets of names are disjoint, so the concatenation is one
 * valid exposition.
 */
import type { StreamRegistry } from '../streams/stream-registry.js';
import type { DaemonHealth } from './daemon-health.js';
import { DaemonMetrics, type DaemonMetricsOptions } from './daemon-metrics.js';
import { renderModelMetricsChunked } from './model-exposition.js';

/** Content type of the text format 0.0.4 (what Prometheus asks for by default besides OpenMetrics). */
export const EXPOSITION_CONTENT_TYPE = 'text/plain; version=0.0.4; charset=utf-8';

export class MetricsExporter {
  readonly daemon: DaemonMetrics;
  /** Streams written per turn of the event loop (see renderModelMetricsChunked). */
  readonly chunk: number;

  constructor(
    readonly registry: StreamRegistry,
    readonly health: DaemonHealth,
    options: DaemonMetricsOptions & { chunk?: number } = {},
  ) {
    this.daemon = new DaemonMetrics(registry, health, options);
    this.chunk = options.chunk ?? 1000;
  }

  /** The whole body as UTF-8 bytes (what the HTTP server sends). */
  async renderBuffer(): Promise<Buffer> {
    const t0 = performance.now();
    const model = await renderModelMetricsChunked(this.registry, this.chunk);
    let daemon = await this.daemon.render();
    if (daemon !== '' && !daemon.endsWith('\n')) daemon += '\n';
    const body = Buffer.concat([Buffer.from(daemon, 'utf8'), model]);
    this.daemon.lastScrapeSeconds = (performance.now() - t0) / 1000;
    return body;
  }

  async render(): Promise<string> {
    return (await this.renderBuffer()).toString('utf8');
  }
}

const exporters = new WeakMap<StreamRegistry, WeakMap<DaemonHealth, MetricsExporter>>();

/**
 * Render /metrics for a registry and a health source. The prom-client side (and its process
 * metrics) is created once per (registry, health) pair and reused by later calls.
 */
export function renderMetrics(registry: StreamRegistry, health: DaemonHealth): Promise<string> {
  let byHealth = exporters.get(registry);
  if (byHealth === undefined) {
    byHealth = new WeakMap();
    exporters.set(registry, byHealth);
  }
  let exporter = byHealth.get(health);
  if (exporter === undefined) {
    exporter = new MetricsExporter(registry, health);
    byHealth.set(health, exporter);
  }
  return exporter.render();
}
