/**
 * `modewatch run --config FILE`: the daemon. Wires the configuration to the rooms: Kafka source,
 * decoders, stream registry, checkpoint store, alert sinks, dead letters, metrics and HTTP, and
 * turns SIGTERM/SIGINT into a clean stop (finish the batch, checkpoint, commit, exit 0).
 */
import type { Kafka } from 'kafkajs';
import pino from 'pino';
import type { Argv, CommandModule } from 'yargs';
import { AlertmanagerSink } from '../alerting/alertmanager-sink.js';
import type { ObservableSink } from '../alerting/delivery-queue.js';
import { FanoutSink } from '../alerting/fanout.js';
import { KafkaSink } from '../alerting/kafka-sink.js';
import { LogSink } from '../alerting/log-sink.js';
import { WebhookSink } from '../alerting/webhook-sink.js';
import {
  alertmanagerSinkOptions,
  deadLetterOptions,
  kafkaConnectionOptions,
  kafkaSourceOptions,
  kafkaStoreOptions,
  loadConfig,
  redactConfig,
  resolveStreamSettings,
  topicDecoding,
  topicEntry,
  webhookSinkOptions,
  type FlagOverrides,
  type ModewatchConfig,
} from '../config/index.js';
import { formatProblem } from '../config/problems.js';
import { Daemon, type DaemonLogger } from '../daemon/daemon.js';
import type { AlertSink } from '../detect/alert.js';
import { HealthState } from '../export/daemon-health.js';
import { startHttpServer, type RunningHttpServer } from '../http/server.js';
import { loadWebConfig } from '../http/web-config.js';
import { createKafka } from '../ingest/kafka-client.js';
import { DeadLetterProducer } from '../ingest/dead-letter.js';
import { KafkaSource } from '../ingest/kafka-source.js';
import { ThreadedKafkaSource } from '../ingest/kafka-thread-source.js';
import { makeMessageDecoder } from '../ingest/message-decoder.js';
import { DirCheckpointStore } from '../state/dir-store.js';
import { KafkaCheckpointStore } from '../state/kafka-store.js';
import type { CheckpointStore } from '../state/store.js';
import { StreamRegistry } from '../streams/stream-registry.js';
import { UsageError } from './usage-error.js';

interface RunArgs {
  config?: string;
  'kafka-brokers'?: string;
  'kafka-group-id'?: string;
  'http-listen'?: string;
  'checkpoint-directory'?: string;
  'log-level'?: string;
}

/** Longest a clean stop may take before the process exits anyway. */
const STOP_BOUND_MS = 30_000;

export function loadOrExplain(path: string | null, flags: FlagOverrides): ModewatchConfig {
  const r = loadConfig(path, process.env, flags, { command: 'run' });
  if (!r.ok) throw new UsageError(`the configuration has ${r.problems.length} problem(s):\n` + r.problems.map((p) => '  ' + formatProblem(path ?? '(flags and environment)', p)).join('\n'));
  return r.config;
}

export interface RunningDaemon {
  daemon: Daemon;
  http: RunningHttpServer;
  registry: StreamRegistry;
  health: HealthState;
  stop(): Promise<void>;
}

/** Build and start everything the configuration describes. */
export async function startDaemon(config: ModewatchConfig, log: pino.Logger, onFatal: (e: Error) => void): Promise<RunningDaemon> {
  const kafkaCfg = config.kafka;
  if (kafkaCfg === null) throw new UsageError(`${config.file ?? 'the configuration'}: kafka: is required by "modewatch run" (brokers and topics)`);
  const kafkaLogger = log.child({ room: 'kafka' });
  const health = new HealthState();

  // Alert sinks.
  const closers: (() => Promise<void>)[] = [];
  const sinks: AlertSink[] = [];
  let alertProducer: ReturnType<Kafka['producer']> | null = null;
  for (const s of config.alerts.sinks) {
    if (s.type === 'log') sinks.push(new LogSink({ logger: log.child({ room: 'alerts' }), name: s.name }));
    else if (s.type === 'alertmanager') sinks.push(new AlertmanagerSink(alertmanagerSinkOptions(s, config)));
    else if (s.type === 'webhook') sinks.push(new WebhookSink(webhookSinkOptions(s)));
    else {
      if (alertProducer === null) {
        alertProducer = createKafka({ ...kafkaConnectionOptions(kafkaCfg), logger: kafkaLogger }).producer();
        await alertProducer.connect();
        const p = alertProducer;
        closers.push(() => p.disconnect());
      }
      sinks.push(new KafkaSink({ producer: alertProducer, topic: s.topic, name: s.name }));
    }
  }
  const fanout = new FanoutSink(sinks);
  for (const s of sinks) if (typeof (s as Partial<ObservableSink>).stats === 'function') health.watchedSinks.push(s as AlertSink & ObservableSink);

  const registry = new StreamRegistry({
    maxStreams: config.streams.maxStreams,
    recentValues: config.streams.recentValues,
    resolve: resolveStreamSettings(config),
    onAlert: (t) => {
      health.transitionCounter.record(t);
      fanout.publish(t);
    },
  });

  const storeOpts = kafkaStoreOptions(config);
  const store: CheckpointStore = storeOpts !== null ? new KafkaCheckpointStore({ ...storeOpts, logger: kafkaLogger }) : new DirCheckpointStore(config.checkpoint.directory);
  const dlqOpts = deadLetterOptions(kafkaCfg);
  const deadLetter = dlqOpts !== null ? new DeadLetterProducer({ ...dlqOpts, logger: kafkaLogger }) : null;
  const sourceOptions = { ...kafkaSourceOptions(kafkaCfg), logger: kafkaLogger };
  const source = kafkaCfg.consumerThread ? new ThreadedKafkaSource(sourceOptions) : new KafkaSource(sourceOptions);

  const webConfig = config.http.webConfigFile !== null ? await loadWebConfig(config.http.webConfigFile) : undefined;
  const http = await startHttpServer({
    listen: { host: config.http.host, port: config.http.port },
    registry,
    health,
    webConfig,
    externalUrl: config.http.externalUrl ?? undefined,
    onRebaseline: (stream, remote) => log.info({ stream, remote }, 'stream re-baselined by an operator'),
  });
  log.info({ url: http.url }, 'http listening');

  const daemon = new Daemon({
    source,
    decoderFor: (topic) => {
      const entry = topicEntry(kafkaCfg, topic);
      return entry === null ? null : makeMessageDecoder(topicDecoding(entry, topic));
    },
    registry,
    store,
    deadLetter,
    checkpointEveryEvents: config.checkpoint.everyEvents,
    checkpointEverySeconds: config.checkpoint.everySeconds,
    health,
    log: log as unknown as DaemonLogger,
    onFatal,
  });
  // Consumer lag for /metrics, refreshed by the source itself (not per event).
  const lagTimer = setInterval(() => {
    health.lagByPartition.clear();
    for (const [p, n] of source.lag()) health.lagByPartition.set(p, n);
  }, 2000);
  lagTimer.unref();

  await daemon.start();
  log.info({ topics: kafkaCfg.topics.map((t) => t.name ?? String(t.pattern)), store: store.name }, 'consuming');

  let stopping: Promise<void> | null = null;
  const stop = (): Promise<void> => {
    stopping ??= (async () => {
      clearInterval(lagTimer);
      await daemon.stop();
      await fanout.close();
      await deadLetter?.close();
      for (const c of closers) await c();
      await store.close();
      await http.close();
    })();
    return stopping;
  };
  return { daemon, http, registry, health, stop };
}

export const runCommand: CommandModule<object, RunArgs> = {
  command: 'run',
  describe: 'Run the daemon: consume Kafka topics, keep a mixture model per stream, export metrics, raise alerts',
  builder: (y: Argv) =>
    y
      .option('config', { type: 'string', describe: 'configuration file (YAML); `modewatch config example` prints one' })
      .option('kafka-brokers', { type: 'string', describe: 'comma-separated host:port list (overrides the file and MODEWATCH_KAFKA_BROKERS)' })
      .option('kafka-group-id', { type: 'string', describe: 'consumer group (overrides the file and MODEWATCH_KAFKA_GROUP_ID)' })
      .option('http-listen', { type: 'string', describe: 'host:port for /metrics, the API and the web page (overrides MODEWATCH_HTTP_LISTEN)' })
      .option('checkpoint-directory', { type: 'string', describe: 'directory for checkpoints (overrides MODEWATCH_CHECKPOINT_DIRECTORY)' })
      .option('log-level', { type: 'string', describe: 'fatal, error, warn, info, debug, trace or silent' }) as unknown as Argv<RunArgs>,
  handler: async (args) => {
    const flags: FlagOverrides = {
      kafkaBrokers: args['kafka-brokers']?.split(',').map((s) => s.trim()).filter((s) => s.length > 0),
      kafkaGroupId: args['kafka-group-id'],
      httpListen: args['http-listen'],
      checkpointDirectory: args['checkpoint-directory'],
      logLevel: args['log-level'],
    };
    const config = loadOrExplain(args.config ?? null, flags);
    const log = pino({ level: config.logging.level, base: { service: 'modewatch' } });
    log.info({ config: redactConfig(config) }, 'starting');
    let running: RunningDaemon | null = null;
    const fatal = (e: Error) => {
      log.error({ err: e.message }, 'fatal: exiting so that the orchestrator restarts the daemon');
      const bound = setTimeout(() => process.exit(1), 5000);
      bound.unref();
      void (running?.stop() ?? Promise.resolve()).finally(() => process.exit(1));
    };
    running = await startDaemon(config, log, fatal);
    let signals = 0;
    const onSignal = (sig: NodeJS.Signals) => {
      signals++;
      if (signals > 1) {
        log.warn({ signal: sig }, 'second signal: exiting at once');
        process.exit(1);
      }
      log.info({ signal: sig }, 'stopping: finishing the batch in hand, checkpointing, committing');
      const bound = setTimeout(() => {
        log.error({ boundMs: STOP_BOUND_MS }, 'clean stop took too long; exiting');
        process.exit(1);
      }, STOP_BOUND_MS);
      bound.unref();
      void running?.stop().then(
        () => {
          log.info({}, 'stopped cleanly');
          process.exit(0);
        },
        (e: unknown) => {
          log.error({ err: (e as Error).message }, 'error while stopping');
          process.exit(1);
        },
      );
    };
    process.on('SIGTERM', onSignal);
    process.on('SIGINT', onSignal);
    await new Promise<never>(() => {});
  },
};
