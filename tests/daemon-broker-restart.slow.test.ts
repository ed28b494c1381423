/**
 * Broker outage mid-stream: the broker is stopped cleanly (SIGTERM) while `modewatch run` (a child process)
 * consumes, started again on the same ports and log dir; the daemon reconnects and resumes with nothing lost
 * or counted twice, and its final models equal those `modewatch replay` computes from the same records.
 * If kafkajs gives up during the outage (a consumer CRASH with restart=false) the daemon must exit non-zero,
 * and a restart of the daemon must then resume from its checkpoint; the test follows whichever happens and
 * prints which.
 */
import { execFile } from 'node:child_process';
import { mkdtemp, readFile, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { promisify } from 'node:util';
import { afterAll, afterEach, beforeAll, describe, expect, it, type TestContext } from 'vitest';
import type { ReplaySummary } from '../src/cli/replay.js';
import { DEFAULT_MONITOR_CONFIG } from '../src/detect/monitor-config.js';
import { StreamMonitor } from '../src/detect/stream-monitor.js';
import { startRestartableBroker, type RestartableBroker } from '../src/devtools/kafka-broker.js';
import { buildScenario } from '../src/simulate/suite.js';
import type { Scenario } from '../src/simulate/scenario.js';
import { CLI, DaemonProcess, REPO, createTopic, eventsTotal, eventValue, httpGet, loadCheckpointDir, produce, simulatedEvents, waitFor, writeDaemonConfig } from './support/daemon-harness.js';
import { freePort } from './support/kafka-broker.js';

const PER_STREAM = 60_000;

function scenario(): Scenario {
  const a = buildScenario('latency-new-slow-mode', { events: PER_STREAM }).streams[0];
  const b = buildScenario('latency-location-shift', { events: PER_STREAM }).streams[0];
  return { name: 'outage-two-streams', description: 'Invented: two latency streams, one gains a slow mode, one shifts.', streams: [{ ...a, name: 'checkout' }, { ...b, name: 'login', rate: 170 }] };
}

let dir = '';
let kafka: RestartableBroker | null = null;
let whyNoBroker = '';
let child: DaemonProcess | null = null;
beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'modewatch-outage-'));
  try {
    kafka = await startRestartableBroker({ log: (l) => console.info(`[kafka] ${l}`) });
  } catch (e) {
    whyNoBroker = e instanceof Error ? e.message : String(e);
    if (process.env.CI === 'true') throw new Error(`CI=true and no restartable Kafka broker: ${whyNoBroker}`);
  }
}, 180_000);
afterEach(async () => {
  // A failed case must not leave its daemon running or the broker down for the next one.
  await child?.dispose();
  child = null;
  if (kafka !== null && !kafka.running) await kafka.restart();
}, 120_000);
afterAll(async () => {
  await child?.dispose();
  await kafka?.stop();
  await rm(dir, { recursive: true, force: true });
}, 60_000);

function need(ctx: TestContext): RestartableBroker {
  if (kafka) return kafka;
  return ctx.skip(`a restartable broker needs Java 17 and the Kafka jars: ${whyNoBroker}`);
}

describe('daemon across a broker restart', () => {
  // A short outage, then one longer than kafkajs's default retry budget (5 retries, about 20 s of back-off).
  it.for([3_000, 45_000])('broker down for %i ms: the daemon resumes; nothing lost, models as replay', { timeout: 420_000 }, async (downMs, ctx) => {
    const k = need(ctx);
    const brokers = k.brokers;
    const tag = `${process.pid}-${Date.now()}`;
    const topic = `outage-events-${tag}`;
    const events = simulatedEvents(scenario(), downMs);
    const N = events.length;
    await createTopic(brokers, topic, 1);
    await produce(brokers, topic, events.map((e) => ({ key: e.key, value: eventValue(e) })), 5000);
    const ndjson = join(dir, `records-${downMs}.ndjson`);
    await writeFile(ndjson, events.map((e) => JSON.stringify({ ts: e.ts, stream: `${topic}:${e.key}`, value: e.value })).join('\n') + '\n');

    const stateDir = join(dir, `state-${downMs}`);
    const port = await freePort();
    const base = `http://127.0.0.1:${port}`;
    const configPath = await writeDaemonConfig(dir, { brokers, topic, groupId: `outage-${tag}`, httpPort: port, checkpointDir: stateDir, everyEvents: 5000 }, `modewatch-${downMs}.yaml`);
    const logFile = join(dir, `daemon-${downMs}.log`);
    child = DaemonProcess.spawn(configPath, logFile);
    const first = child;
    let outcome = '';
    try {
      await waitFor('the daemon ready', async () => (await httpGet(`${base}/readyz`))?.status === 200, 120_000);
      const before = await waitFor('the daemon to be consuming', async () => {
        const n = await eventsTotal(base);
        return n !== undefined && n >= N / 10 ? n : undefined;
      }, 60_000, 20);

      // The outage: a clean broker shutdown while records remain to be read.
      const t0 = Date.now();
      await k.halt();
      const duringHalt = (await eventsTotal(base)) ?? -1;
      expect(duringHalt).toBeLessThan(N);
      // Down for a while, then back on the same ports and data.
      await new Promise((res) => setTimeout(res, downMs));
      const ready = await httpGet(`${base}/readyz`);
      await k.restart();
      const outageMs = Date.now() - t0;

      // Either the daemon carries on, or it exits non-zero and is restarted.
      const result = await Promise.race([
        waitFor(`all ${N} events after the outage`, async () => (await eventsTotal(base)) === N, 180_000, 100).then(() => 'finished' as const),
        first.exited.then((r) => r),
      ]);
      if (result === 'finished') {
        const restarts = first.tail.split('kafka consumer crashed; kafkajs restarts it').length - 1;
        outcome = `the daemon rode out a ${outageMs} ms broker outage (events_total ${before} when the broker was stopped, ${duringHalt} when it was down; /readyz during the outage: ${ready?.status}; consumer restarts by kafkajs: ${restarts})`;
      } else {
        expect(result.code).not.toBe(0);
        expect(first.tail).toMatch(/fatal/);
        outcome = `kafkajs gave up during a ${outageMs} ms outage: the daemon exited with code ${result.code}; restarted, it resumed from its checkpoint`;
        child = DaemonProcess.spawn(configPath, logFile);
        await waitFor(`all ${N} events after the daemon's restart`, async () => (await eventsTotal(base)) === N, 180_000, 100);
      }
      const stopped = await child.signal('SIGTERM');
      expect(stopped).toEqual({ code: 0, signal: null });
    } catch (e) {
      console.error(`daemon output tail:\n${child.tail.slice(-5000)}`);
      throw e;
    }
    console.info(`[outage] ${outcome}`);

    // Counted exactly once.
    const cp = await loadCheckpointDir(stateDir);
    expect(cp.positions).toEqual({ [`${topic}-0`]: N });
    expect(cp.counters).toEqual({ [`${topic}-0`]: { accepted: N } });

    // The models as replay (the same program, dist/) computes them from the same records.
    const summaryPath = join(dir, `replay-summary-${downMs}.json`);
    await promisify(execFile)(process.execPath, [CLI, 'replay', ndjson, '--config', configPath, '--summary', summaryPath], { cwd: REPO, maxBuffer: 64 << 20 });
    const summary = JSON.parse(await readFile(summaryPath, 'utf8')) as ReplaySummary;
    expect(summary.accepted).toBe(N);
    const strip = (v: { id: number; weight: number; location: number; spread: number }) => ({ id: v.id, weight: v.weight, location: v.location, spread: v.spread });
    const fromDaemon: Record<string, unknown> = {};
    for (const [name, state] of cp.monitors) {
      // Read-outs only: the checkpointed state decides every number; the config passed here does not.
      const m = StreamMonitor.importState(state, { ...DEFAULT_MONITOR_CONFIG, scale: state.scale }, () => {});
      fromDaemon[name] = { scale: m.scale, state: m.state, events: m.eventsAccepted, reference: m.views(m.reference).map(strip), current: m.views(m.current).map(strip) };
    }
    expect(fromDaemon).toEqual(summary.finalComponents);
  });
});
