/**
 * `modewatch demo`: the daemon's pipeline fed by a built-in invented scenario, with no Kafka: three
 * streams, a new mode after a short while, a weight shift later, time compressed so that it all
 * happens within a few minutes. Serves the web page and /metrics, prints alerts, stops on Ctrl-C.
 */
import { fileURLToPath } from 'node:url';
import type { Argv, CommandModule } from 'yargs';
import type { AlertTransition } from '../detect/alert.js';
import { DEFAULT_MONITOR_CONFIG, type MonitorConfig } from '../detect/monitor-config.js';
import { DemoFeed, anchorToNow } from '../demo/demo-feed.js';
import { HealthState } from '../export/daemon-health.js';
import { startHttpServer, type RunningHttpServer } from '../http/server.js';
import { StreamRegistry } from '../streams/stream-registry.js';
import { loadScenarioFile } from './simulate-command.js';
import { UsageError } from './usage-error.js';

interface DemoArgs {
  'http-listen': string;
  speed: number;
  seed: number;
  scenario?: string;
}

export const DEMO_SCENARIO = fileURLToPath(new URL('../../demo-data/shop-scenario.yaml', import.meta.url));
/** Events per stream fed at start: past the monitors' warm-up (3 000 by default), so alerts can come at once. */
const FAST_FORWARD_PER_STREAM = 5000;

/** Per-stream settings for the demo's streams: log scale; the unit from the name's suffix. */
export function demoSettings(stream: string): { monitor: MonitorConfig } {
  const unit = stream.endsWith('-ms') ? 'milliseconds' : stream.endsWith('-bytes') ? 'bytes' : '';
  return { monitor: { ...DEFAULT_MONITOR_CONFIG, scale: 'log', unit } };
}

/** Event time of day (UTC); the demo's event time runs at --speed times the wall clock. */
function clock(ms: number): string {
  return new Date(ms).toISOString().slice(11, 19);
}

export function describeTransition(t: AlertTransition): string {
  const state = t.state === 'firing' ? 'FIRING  ' : 'RESOLVED';
  const why = t.state === 'resolved' && t.resolution !== null ? ` (${t.resolution})` : '';
  return `[${clock(t.ts)}] ${state} ${t.kind.padEnd(15)} ${t.stream}: ${t.evidence.summary}${why}; first evidence ${clock(t.evidence.firstEvidenceTs)}`;
}

async function listen(hostPort: string, registry: StreamRegistry, health: HealthState): Promise<RunningHttpServer> {
  const m = /^(.*):(\d+)$/.exec(hostPort);
  if (m === null) throw new UsageError(`--http-listen must be host:port, got ${JSON.stringify(hostPort)}`);
  const host = m[1].replace(/^\[|\]$/g, '');
  const port = Number(m[2]);
  try {
    return await startHttpServer({ listen: { host, port }, registry, health });
  } catch (e) {
    if ((e as NodeJS.ErrnoException).code !== 'EADDRINUSE') throw e;
    process.stdout.write(`port ${port} is in use; taking a free one\n`);
    return startHttpServer({ listen: { host, port: 0 }, registry, health });
  }
}

export const demoCommand: CommandModule<object, DemoArgs> = {
  command: 'demo',
  describe: 'Play an invented scenario through the pipeline with no Kafka; serve the web page and /metrics',
  builder: (y: Argv) =>
    y
      .option('http-listen', { type: 'string', default: '127.0.0.1:9471', describe: 'host:port for the web page and /metrics' })
      .option('speed', { type: 'number', default: 1, describe: 'play faster (2 = twice as fast)' })
      .option('seed', { type: 'number', default: 7, describe: 'random seed of the scenario' })
      .option('scenario', { type: 'string', describe: 'another scenario file (YAML or JSON, as `modewatch simulate` reads)' }) as unknown as Argv<DemoArgs>,
  handler: async (args) => {
    if (!(args.speed > 0 && args.speed <= 100)) throw new UsageError(`--speed must be in (0, 100], got ${args.speed}`);
    const path = args.scenario ?? DEMO_SCENARIO;
    const scenario = anchorToNow(await loadScenarioFile(path), FAST_FORWARD_PER_STREAM, Date.now());
    const perStreamRate = scenario.streams.reduce((a, s) => a + s.rate, 0);
    const out = process.stdout;
    const registry = new StreamRegistry({
      maxStreams: 1000,
      resolve: demoSettings,
      onAlert: (t) => {
        health.transitionCounter.record(t);
        out.write(describeTransition(t) + '\n');
      },
    });
    const health = new HealthState();
    health.isReady = true;
    health.reason = 'ready';
    const http = await listen(args['http-listen'], registry, health);
    out.write(
      `modewatch demo: ${scenario.streams.length} invented streams (${scenario.streams.map((s) => s.name).join(', ')}); see demo-data/README.md\n` +
        `  web page: ${http.url}/\n  metrics:  ${http.url}/metrics\n  API:      ${http.url}/api/streams\n`,
    );
    const feed = new DemoFeed(scenario, registry, {
      fastForward: FAST_FORWARD_PER_STREAM * scenario.streams.length,
      recordsPerSecond: perStreamRate * args.speed,
      seed: args.seed,
      onFinished: () => out.write('the scenario has played to its end; the page stays up until Ctrl-C\n'),
    });
    feed.start();
    out.write(
      `Warmed up on the first ${FAST_FORWARD_PER_STREAM} events of each stream; now playing ${Math.round(perStreamRate * args.speed)} events/s.\n` +
        `Watch for a new slow checkout mode in about ${Math.round(20 / args.speed)} s and a search weight shift in about ${Math.round(80 / args.speed)} s. Ctrl-C stops.\n`,
    );
    await new Promise<void>((resolve) => {
      const stop = () => {
        feed.stop();
        void http.close().then(resolve, resolve);
      };
      process.once('SIGINT', stop);
      process.once('SIGTERM', stop);
    });
    out.write(`stopped after ${feed.fed} records\n`);
  },
};
