/**
 * End to end with the ecosystem's own server: a real Prometheus (Debian's prometheus package) scrapes the daemon's
 * HTTP server on loopback while a scenario plays into its pipeline, and a query through Prometheus's HTTP API returns
 * the component weights the daemon holds.
 */
import { afterAll, describe, expect, it } from 'vitest';
import { DEFAULT_MONITOR_CONFIG } from '../src/detect/monitor-config.js';
import { DemoFeed } from '../src/demo/demo-feed.js';
import { HealthState } from '../src/export/daemon-health.js';
import { startHttpServer, type RunningHttpServer } from '../src/http/server.js';
import { buildScenario } from '../src/simulate/suite.js';
import { StreamRegistry } from '../src/streams/stream-registry.js';
import { startPrometheus, type RunningServer } from './support/prometheus-tools.js';

interface VectorResult {
  metric: Record<string, string>;
  value: [number, string];
}

async function query(prom: RunningServer, q: string): Promise<VectorResult[]> {
  const res = await fetch(`${prom.url}/api/v1/query?query=${encodeURIComponent(q)}`);
  const body = (await res.json()) as { status: string; data: { result: VectorResult[] } };
  expect(body.status).toBe('success');
  return body.data.result;
}

describe('a real Prometheus scrapes the daemon', () => {
  let http: RunningHttpServer | undefined;
  let prom: RunningServer | undefined;
  let feed: DemoFeed | undefined;
  afterAll(async () => {
    feed?.stop();
    await prom?.stop();
    await http?.close();
  });

  it('returns through its query API the weights the daemon holds', async () => {
    const registry = new StreamRegistry({
      maxStreams: 100,
      resolve: () => ({ monitor: { ...DEFAULT_MONITOR_CONFIG, scale: 'log', unit: 'milliseconds' } }),
      onAlert: () => {},
    });
    const health = new HealthState();
    health.isReady = true;
    http = await startHttpServer({ listen: { host: '127.0.0.1', port: 0 }, registry, health });
    // The invented two-mode checkout latency stream: fast-forward past warm-up, then keep playing while scraped.
    feed = new DemoFeed(buildScenario('latency-stationary', { events: 200_000 }), registry, { fastForward: 8000, recordsPerSecond: 2000, seed: 3 });
    feed.start();
    const target = new URL(http.url).host;
    const config = ['global:', '  scrape_interval: 1s', 'scrape_configs:', '  - job_name: modewatch', '    static_configs:', `      - targets: ['${target}']`, ''].join('\n');
    prom = await startPrometheus(config);

    // Wait (bounded) until Prometheus has scraped the component weights.
    let got: VectorResult[] = [];
    for (let i = 0; i < 150 && got.length < 2; i++) {
      got = await query(prom, 'modewatch_component_weight{stream="checkout-latency-ms"}');
      if (got.length < 2) await new Promise((r) => setTimeout(r, 200));
    }
    expect(got.length).toBe(2);
    // Stop the feed so the daemon's weights stand still, let one more scrape land, and compare.
    feed.stop();
    const entry = registry.get('checkout-latency-ms');
    expect(entry).toBeDefined();
    const held = new Map(entry!.monitor.views(entry!.monitor.current).map((c) => [String(c.id), c.weight]));
    let matched = false;
    for (let i = 0; i < 50 && !matched; i++) {
      await new Promise((r) => setTimeout(r, 300));
      got = await query(prom, 'modewatch_component_weight{stream="checkout-latency-ms"}');
      matched = got.length === held.size && got.every((r) => Math.abs(Number(r.value[1]) - (held.get(r.metric.component) ?? NaN)) < 1e-9);
    }
    expect(got.map((r) => [r.metric.component, Number(r.value[1])]).sort()).toEqual([...held.entries()].sort().map(([id, w]) => [id, expect.closeTo(w, 9)]));
    // The two invented modes: about 80 % near 40 ms and 20 % near 180 ms, in seconds (base units).
    const loc = await query(prom, 'modewatch_component_location_seconds{stream="checkout-latency-ms"}');
    const locs = loc.map((r) => Number(r.value[1])).sort((a, b) => a - b);
    expect(locs[0]).toBeCloseTo(0.04, 2);
    expect(locs[1]).toBeCloseTo(0.18, 1);
    const up = await query(prom, 'up{job="modewatch"}');
    expect(up[0].value[1]).toBe('1');
  });
});
