// /metrics as Prometheus itself judges it: Debian's promtool 2.42 (`promtool check metrics`, which
// parses the text format and lints names, types, HELP and units) must report nothing. The registry
// holds invented streams in several units, an awkward stream name, a stream still bootstrapping and
// one with a fired alert, and the health has lag, a sink and transitions, so every family appears.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { LogSink } from '../src/alerting/log-sink.js';
import type { AlertTransition } from '../src/detect/alert.js';
import { monitorConfig, type MonitorConfig } from '../src/detect/monitor-config.js';
import { HealthState } from '../src/export/daemon-health.js';
import { METRICS } from '../src/export/metric-names.js';
import { startHttpServer, type RunningHttpServer } from '../src/http/server.js';
import { EventSlot } from '../src/ingest/event.js';
import { Mixture1D } from '../src/math/mixture1d.js';
import { Random } from '../src/math/random.js';
import { StreamRegistry } from '../src/streams/stream-registry.js';
import { knownMetricNames, promtoolCheckMetrics } from './support/prometheus-tools.js';

const health = new HealthState();
const logged: string[] = [];
const sink = new LogSink({ name: 'log', logger: { info: (_o: object, msg: string) => void logged.push(msg) } });
health.watchedSinks.push(sink);
const onAlert = (t: AlertTransition) => {
  health.transitionCounter.record(t);
  sink.publish(t);
};

const configs: Record<string, Partial<MonitorConfig>> = {
  'checkout latency "p\\q"\nline2': { unit: 'milliseconds' },
  'upload-size': { unit: 'kilobytes' },
  'queue-wait': { unit: 'seconds' },
  temperature: { unit: '' },
  'jobs-per-batch': { unit: 'jobs' }, // no base-unit mapping: bare family
  'new-mode': {
    unit: 'milliseconds',
    warmupEvents: 300,
    known: [
      { weight: 0.7, family: 'lognormal', location: 40, spread: 0.15 },
      { weight: 0.3, family: 'lognormal', location: 180, spread: 0.2 },
    ],
  },
};
const registry = new StreamRegistry({
  maxStreams: 7,
  resolve: (s) => ({ monitor: monitorConfig({ bootstrapEvents: 300, warmupEvents: 600, ...(configs[s] ?? {}) }) }),
  onAlert,
  recentValues: 256,
});
const slot = new EventSlot();
const rng = new Random(99);
function feed(stream: string, mix: Mixture1D, n: number, t0: number): void {
  for (let i = 0; i < n; i++) {
    slot.stream = stream;
    slot.value = mix.sample(rng);
    slot.ts = t0 + i * 50;
    slot.offset = i;
    slot.partition = 'latency-0';
    registry.observe(slot);
  }
}

let server: RunningHttpServer;

beforeAll(async () => {
  // Invented data. Latencies in ms: a fast and a slow mode; sizes in kB; waits in s; a symmetric level.
  const lat = new Mixture1D('log', [0.75, 0.25], [Math.log(40), Math.log(180)], [0.15, 0.2]);
  feed('checkout latency "p\\q"\nline2', lat, 3000, 1.7e12);
  feed('upload-size', new Mixture1D('log', [0.5, 0.5], [Math.log(4), Math.log(900)], [0.4, 0.3]), 3000, 1.7e12);
  feed('queue-wait', new Mixture1D('log', [0.9, 0.1], [Math.log(0.002), Math.log(0.5)], [0.3, 0.3]), 3000, 1.7e12);
  feed('temperature', new Mixture1D('identity', [0.5, 0.5], [-3, 12], [1.5, 2]), 3000, 1.7e12);
  feed('jobs-per-batch', new Mixture1D('identity', [1], [30], [4]), 3000, 1.7e12);
  feed('booting', lat, 10, 1.7e12);
  // A stream whose traffic gains a slow third mode at 5 %: mode_emerged fires.
  feed('new-mode', lat, 2000, 1.7e12);
  feed('new-mode', new Mixture1D('log', [0.67, 0.28, 0.05], [Math.log(40), Math.log(180), Math.log(2500)], [0.15, 0.2, 0.1]), 6000, 1.7e12 + 1e5);
  // Decoding failures and a refused stream (the cap is 7).
  registry.reject('unparseable');
  feed('one-too-many', lat, 3, 1.7e12);
  health.lagByPartition.set('latency-0', 120);
  health.lagByPartition.set('latency-1', 0);
  health.checkpointingEnabled = true;
  health.lastCheckpointMs = Date.now() - 5000;
  health.busySeconds = 1.25;
  health.isReady = true;
  server = await startHttpServer({ listen: { host: '127.0.0.1', port: 0 }, registry, health });
});

afterAll(async () => {
  await server?.close();
  await sink.close();
});


describe('promtool check metrics', () => {
  it('finds nothing to report in a scrape of /metrics', async () => {
    const m = registry.get('new-mode')!.monitor;
    expect(m.alerts().some((a) => a.kind === 'mode_emerged')).toBe(true);
    expect(registry.refusedByCap).toBe(3);
    const text = await (await fetch(`${server.url}/metrics`)).text();
    // Every family this test means to cover is in the scrape.
    for (const name of [
      METRICS.componentWeight,
      METRICS.referenceWeight,
      `${METRICS.componentLocation}_seconds`,
      `${METRICS.componentLocation}_bytes`,
      METRICS.componentLocation,
      `${METRICS.componentSpread}_seconds`,
      METRICS.alertActive,
      METRICS.alertTransitionsTotal,
      METRICS.sinkDeliveredTotal,
      METRICS.consumerLag,
      METRICS.checkpointAge,
    ]) {
      expect(text).toContain(`# TYPE ${name} `);
    }
    expect(text).toMatch(new RegExp(`${METRICS.alertTransitionsTotal}\\{kind="mode_emerged",state="firing"\\} 1\\n`));
    expect(text).toContain(`${METRICS.sinkDeliveredTotal}{sink="log"} 1`);
    const res = await promtoolCheckMetrics(text);
    expect(res.out).toBe('');
    expect(res.code).toBe(0);
    // Names outside metric-names.ts are only prom-client's process set under the prefix.
    const known = await knownMetricNames();
    const types = [...text.matchAll(/^# TYPE (\S+) /gm)].map((x) => x[1]);
    const unknown = types.filter((n) => !known.has(n));
    expect(unknown.length).toBeGreaterThan(0);
    for (const n of unknown) expect(n).toMatch(/^modewatch_(process|nodejs)_/);
  });

  it('stays valid after a stream is removed and when the registry is empty', async () => {
    registry.remove('temperature');
    const text = await (await fetch(`${server.url}/metrics`)).text();
    expect(text).not.toContain('stream="temperature"');
    expect(await promtoolCheckMetrics(text)).toEqual({ code: 0, out: '' });
    for (const s of [...registry.streams()].map((e) => e.name)) registry.remove(s);
    const empty = await (await fetch(`${server.url}/metrics`)).text();
    expect(empty).not.toContain(METRICS.componentWeight);
    expect(await promtoolCheckMetrics(empty)).toEqual({ code: 0, out: '' });
  });
});
