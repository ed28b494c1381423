/**
 * Crash equivalence on a real broker: `modewatch run` as a child process is killed with SIGKILL at seeded random
 * points while it consumes 200k events (four streams on two partitions), restarted each time with the same
 * configuration and consumer group, then let finish and stopped with SIGTERM. Its checkpointed models must equal
 * those of an uninterrupted run (in practice bit for bit), and the per-partition counters must account for every
 * record exactly once.
 *
 * After a SIGKILL the dead member stays in the group until its session expires (kafkajs's default session
 * timeout, 30 s), so each restart waits about that long before it is given its partitions: most of this
 * file's run time.
 */
import { mkdir, mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { Random } from '../src/math/random.js';
import type { Scenario } from '../src/simulate/scenario.js';
import { buildScenario } from '../src/simulate/suite.js';
import {
  DaemonProcess,
  createTopic,
  eventsTotal,
  eventValue,
  httpGet,
  loadCheckpointDir,
  maxRelativeDifference,
  produce,
  simulatedEvents,
  waitFor,
  writeDaemonConfig,
} from './support/daemon-harness.js';
import { freePort, useSharedBroker } from './support/kafka-broker.js';

const broker = useSharedBroker();
const PER_STREAM = 50_000;
const KILLS = 5;
const SEED = 20_240_611;

/** Four invented latency streams with different changes; two per partition. */
function scenario(): Scenario {
  const pick = (name: string, as: string, rate: number) => ({ ...buildScenario(name, { events: PER_STREAM }).streams[0], name: as, rate });
  return {
    name: 'crash-four-streams',
    description: 'Invented: four latency streams, each with one change half way.',
    streams: [pick('latency-new-slow-mode', 'checkout', 200), pick('latency-weight-shift', 'search', 170), pick('latency-location-shift', 'login', 230), pick('latency-mode-vanishes', 'cart', 190)],
  };
}
const PARTITION: Record<string, number> = { checkout: 0, search: 1, login: 0, cart: 1 };

let dir = '';
let child: DaemonProcess | null = null;
beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'modewatch-crash-'));
});
afterAll(async () => {
  await child?.dispose();
  await rm(dir, { recursive: true, force: true });
});

describe('daemon crash and restart', () => {
  it('killed with SIGKILL at random points and restarted, ends with the models of an uninterrupted run and exact counts', async (ctx) => {
    const { brokers } = broker.get(ctx);
    const tag = `${process.pid}-${Date.now()}`;
    const topic = `crash-events-${tag}`;
    const events = simulatedEvents(scenario(), 11);
    const N = events.length;
    expect(N).toBe(4 * PER_STREAM);
    await createTopic(brokers, topic, 2);
    const sent = await produce(
      brokers,
      topic,
      events.map((e) => ({ key: e.key, value: eventValue(e), partition: PARTITION[e.key] })),
      5000,
    );

    // The uninterrupted run: the same program (dist/, as the crashing run uses), its own group and checkpoint directory.
    const refDir = join(dir, 'reference-state');
    const refPort = await freePort();
    const refConfig = await writeDaemonConfig(dir, { brokers, topic, groupId: `crash-ref-${tag}`, httpPort: refPort, checkpointDir: refDir, everyEvents: 5000 }, 'reference.yaml');
    child = DaemonProcess.spawn(refConfig, join(dir, 'reference.log'));
    await waitFor(`the uninterrupted run to account for all ${N} events`, async () => (await eventsTotal(`http://127.0.0.1:${refPort}`)) === N, 180_000, 100);
    expect(await child.signal('SIGTERM')).toEqual({ code: 0, signal: null });
    const expected = await loadCheckpointDir(refDir);

    // The crashing run: a child process, same configuration every time.
    const stateDir = join(dir, 'state');
    await mkdir(stateDir);
    const port = await freePort();
    const base = `http://127.0.0.1:${port}`;
    const configPath = await writeDaemonConfig(dir, { brokers, topic, groupId: `crash-${tag}`, httpPort: port, checkpointDir: stateDir, everyEvents: 5000 });
    const logFile = join(dir, 'daemon.log');
    const rng = new Random(SEED);
    // One kill point in each of KILLS equal slices of the first 85 % of the stream, so they spread over the run and the
    // last one still lands while it consumes (a fetch can bring ~20k records at once, and the count moves by batches).
    const targets = Array.from({ length: KILLS }, (_, i) => Math.floor(((i + 0.1 + 0.8 * rng.uniform()) * 0.85 * N) / KILLS));
    const killedAt: { target: number; restoredTo: number; seen: number }[] = [];
    try {
      for (const target of targets) {
        child = DaemonProcess.spawn(configPath, logFile);
        const c = child;
        await waitFor('the daemon ready (partitions assigned, state restored)', async () => c.alive && (await httpGet(`${base}/readyz`))?.status === 200, 120_000, 100);
        const restoredTo = (await eventsTotal(base)) ?? -1;
        // Kill while it consumes: it has processed events since its restore, and has not reached the end.
        const seen = await waitFor(
          `events_total >= ${target} after a restore to ${restoredTo}`,
          async () => {
            if (!c.alive) throw new Error(`the daemon exited: ${c.tail.slice(-2000)}`);
            const n = await eventsTotal(base);
            return n !== undefined && n > restoredTo && n >= target ? n : undefined;
          },
          120_000,
          20,
        );
        const r = await c.signal('SIGKILL');
        expect(r.signal).toBe('SIGKILL');
        killedAt.push({ target, restoredTo, seen });
        expect(seen).toBeLessThan(N);
      }

      // Last start: runs to the end; then a clean stop.
      child = DaemonProcess.spawn(configPath, logFile);
      const c = child;
      await waitFor(`the daemon to account for all ${N} events`, async () => (await eventsTotal(base)) === N, 180_000, 100);
      const stopped = await c.signal('SIGTERM');
      expect(stopped).toEqual({ code: 0, signal: null });
      expect(c.tail).toContain('stopped cleanly');
    } catch (e) {
      console.error(`kill points so far: ${JSON.stringify(killedAt)}\ndaemon output tail:\n${child?.tail.slice(-4000)}`);
      throw e;
    }
    console.info(`[crash] ${N} events; kills (target, restored to, events_total when killed): ${JSON.stringify(killedAt)}`);

    const got = await loadCheckpointDir(stateDir);
    // Every record counted exactly once, per partition.
    for (const [p, n] of sent) {
      const name = `${topic}-${p}`;
      expect(got.positions[name]).toBe(n);
      const counts = got.counters[name];
      const total = Object.entries(counts).reduce((a, [k, v]) => a + (k === 'accepted' || k.startsWith('rejected:') ? v : 0), 0);
      expect(total).toBe(n);
      expect(counts).toEqual(expected.counters[name]);
    }
    expect(got.positions).toEqual(expected.positions);

    // The models: every number of every monitor's state (weights, means, sds, CUSUMs, alert book) as in the reference.
    expect([...got.monitors.keys()].sort()).toEqual([...expected.monitors.keys()].sort());
    let worst = 0;
    for (const [name, state] of expected.monitors) {
      expect(state.phase).toBe('armed');
      worst = Math.max(worst, maxRelativeDifference(got.monitors.get(name), state));
    }
    console.info(`[crash] largest relative difference from the uninterrupted run over all monitor state: ${worst}`);
    expect(worst).toBeLessThanOrEqual(1e-9);
  }, 420_000);
});
