/**
 * End to end on a real broker: simulated records produced to a one-partition topic give, in the daemon
 * (startDaemon in this process: Kafka source, decoder, registry, checkpoints, Kafka alert sink), the same final
 * models and the same alert transitions as `runReplay` over the same records written as NDJSON. With one
 * partition and no bad records, Kafka offsets equal NDJSON line offsets, so transitions match offset for offset.
 */
import { mkdtemp, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Writable } from 'node:stream';
import pino from 'pino';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { runReplay } from '../src/cli/replay.js';
import { loadOrExplain, startDaemon, type RunningDaemon } from '../src/cli/run-command.js';
import { resolveStreamSettings } from '../src/config/index.js';
import type { AlertTransition } from '../src/detect/alert.js';
import { buildScenario } from '../src/simulate/suite.js';
import type { Scenario } from '../src/simulate/scenario.js';
import { consumeAll, createTopic, eventValue, httpGet, loadCheckpointDir, maxRelativeDifference, metricValue, produce, simulatedEvents, waitFor, writeDaemonConfig } from './support/daemon-harness.js';
import { freePort, useSharedBroker } from './support/kafka-broker.js';
import { promtoolCheckMetrics } from './support/prometheus-tools.js';

const broker = useSharedBroker();
const PER_STREAM = 10_000;

class Lines extends Writable {
  text = '';
  override _write(c: Buffer | string, _e: BufferEncoding, cb: () => void): void {
    this.text += c.toString();
    cb();
  }
}

/** Two invented latency streams, interleaved by event time: one gains a slow mode, one shifts its weights. */
function twoStreamScenario(): Scenario {
  const a = buildScenario('latency-new-slow-mode', { events: PER_STREAM }).streams[0];
  const b = buildScenario('latency-weight-shift', { events: PER_STREAM, changeAt: 6000 }).streams[0];
  return {
    name: 'e2e-two-streams',
    description: 'Invented: checkout latency gains a 900 ms mode; search latency moves its weights from 80/20 to 60/40.',
    streams: [
      { ...a, name: 'checkout' },
      { ...b, name: 'search', rate: 150 },
    ],
  };
}

let dir = '';
let running: RunningDaemon | null = null;
beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'modewatch-e2e-'));
});
afterAll(async () => {
  await running?.stop().catch(() => {});
  await rm(dir, { recursive: true, force: true });
});

describe('daemon end to end', () => {
  it('gives the same final models and alert transitions as replay of the same records', async (ctx) => {
    const { brokers } = broker.get(ctx);
    const tag = `${process.pid}-${Date.now()}`;
    const topic = `e2e-events-${tag}`;
    const alertTopic = `e2e-alerts-${tag}`;
    const events = simulatedEvents(twoStreamScenario(), 7);
    expect(events.length).toBe(2 * PER_STREAM);

    // The NDJSON replay reads: the stream named as the daemon names it, `<topic>:<key>`.
    const ndjson = join(dir, 'records.ndjson');
    await writeFile(ndjson, events.map((e) => JSON.stringify({ ts: e.ts, stream: `${topic}:${e.key}`, value: e.value })).join('\n') + '\n');
    await createTopic(brokers, topic, 1);
    await createTopic(brokers, alertTopic, 1);
    await produce(brokers, topic, events.map((e) => ({ key: e.key, value: eventValue(e) })));

    const cpDir = join(dir, 'state');
    const configPath = await writeDaemonConfig(dir, {
      brokers,
      topic,
      groupId: `e2e-${tag}`,
      httpPort: await freePort(),
      checkpointDir: cpDir,
      everyEvents: 5000,
      alertTopic,
    });
    const config = loadOrExplain(configPath, {});
    const fatal: Error[] = [];
    running = await startDaemon(config, pino({ level: 'fatal' }) /* kafkajs's retries on a fresh broker are noise here */, (e) => fatal.push(e));
    const { registry, daemon, http } = running;
    await waitFor(`all ${events.length} events accepted (at ${registry.accepted})`, () => registry.accepted === events.length, 120_000, 100);

    // Replay: the same pipeline over the file, with the stream settings of the same configuration.
    const out = new Lines();
    const summary = await runReplay({ files: [ndjson], resolve: resolveStreamSettings(config) }, out);
    expect(summary.accepted).toBe(events.length);
    const replayed = out.text.split('\n').filter((l) => l.length > 0).map((l) => JSON.parse(l) as Record<string, unknown>);
    expect(replayed.length).toBeGreaterThanOrEqual(2); // the scenario's changes do fire (at least one per stream)
    expect(new Set(replayed.map((r) => r.stream))).toEqual(new Set([`${topic}:checkout`, `${topic}:search`]));

    // Metrics agree with the registry while it runs.
    const metrics = await httpGet(`${http.url}/metrics`);
    expect(metricValue(metrics?.text ?? '', 'modewatch_events_total')).toBe(events.length);
    // Debian's promtool on a real scrape of the running daemon: it reports nothing.
    const checked = await promtoolCheckMetrics(metrics?.text ?? '');
    expect(checked).toEqual({ code: 0, out: '' });

    // Final models: views of both models of every stream, exactly.
    const strip = (v: { id: number; weight: number; location: number; spread: number }) => ({ id: v.id, weight: v.weight, location: v.location, spread: v.spread });
    const daemonModels: Record<string, unknown> = {};
    for (const e of registry.streams()) {
      const m = e.monitor;
      daemonModels[e.name] = { scale: m.scale, state: m.state, events: m.eventsAccepted, reference: m.views(m.reference).map(strip), current: m.views(m.current).map(strip) };
    }
    expect(daemonModels).toEqual(summary.finalComponents);
    const liveStates = new Map([...registry.streams()].map((e) => [e.name, e.feed.monitor.exportState()]));
    // Totals cover the partitions held, so they are read before the stop revokes them.
    expect(daemon.totals()).toEqual({ accepted: events.length, rejected: {}, positions: { [`${topic}-0`]: events.length } });

    await running.stop();
    running = null;
    expect(fatal).toEqual([]);

    // The clean stop's checkpoint holds exactly the in-memory monitors, the position and the counters.
    const cp = await loadCheckpointDir(cpDir);
    expect(cp.positions).toEqual({ [`${topic}-0`]: events.length });
    expect(cp.counters).toEqual({ [`${topic}-0`]: { accepted: events.length } });
    expect([...cp.monitors.keys()].sort()).toEqual([...liveStates.keys()].sort());
    for (const [name, state] of liveStates) expect(maxRelativeDifference(cp.monitors.get(name), state)).toBe(0);

    // Alerts: what the Kafka sink delivered, in order, against replay's transitions.
    const delivered = await consumeAll(brokers, alertTopic, replayed.length, 30_000);
    const key = (o: { offset: unknown; stream: unknown; kind: unknown; state: unknown; componentId: unknown }) => ({ offset: o.offset, stream: o.stream, kind: o.kind, state: o.state, componentId: o.componentId });
    const fromDaemon = delivered.map((m) => {
      const t = JSON.parse(m.value?.toString('utf8') ?? 'null') as AlertTransition;
      expect(m.key?.toString('utf8')).toBe(t.stream);
      return key({ ...t, componentId: t.evidence.componentId });
    });
    expect(fromDaemon).toEqual(replayed.map((r) => key(r as Parameters<typeof key>[0])));
  });
});
