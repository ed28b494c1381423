/**
 * The modewatch configuration: the file format and the typed, defaulted, resolved object loadConfig returns.
 *
 * File format (YAML, keys in camelCase; every key optional unless marked "required"; unknown keys are errors):
 *
 *   kafka:                              # needed by `modewatch run`; absent: no Kafka at all
 *     brokers: [host:port, ...]         # required, non-empty
 *     clientId: modewatch               # default modewatch
 *     groupId: modewatch                # consumer group; default modewatch
 *     fromBeginning: false              # partitions with no committed offset start at the earliest (true) or latest
 *     sessionTimeoutMs: 30000           # a daemon silent this long loses its partitions (6000..1800000)
 *     consumerThread: true              # the consumer on a thread of its own: fetching overlaps modelling
 *     ssl: false                        # TLS to the brokers with the system's CAs
 *     sasl:                             # optional
 *       mechanism: plain                # plain | scram-sha-256 | scram-sha-512
 *       username: modewatch             # required
 *       passwordEnv: KAFKA_PASSWORD     # name of an environment variable holding the password, or
 *       passwordFile: ./kafka-password  # a file holding it (one trailing newline is dropped); exactly one of the two.
 *                                       # An inline `password:` is refused: config files get copied and printed.
 *     topics:                           # required, non-empty; all `name` or all `pattern` (not mixed)
 *       - name: checkout-latency        # a Kafka topic name ([A-Za-z0-9._-], 1..249 chars), or
 *         pattern: "^latency\\."         # a JavaScript regular expression matched against existing topic names
 *         decoding:                     # required: a MessageDecoding (src/ingest/message-decoder.ts) without `topic`
 *           value: { format: json, path: latency_ms }
 *           key: { from: field, path: endpoint }
 *           time: { from: field, path: ts, unit: ms }
 *           maxBytes: 1048576
 *     deadLetterTopic: modewatch-dead-letters   # optional: rejected records are copied there
 *   streams:
 *     maxStreams: 100000                # cap on streams held (1..10000000)
 *     recentValues: 256                 # recent values kept per stream for the histogram (0..65536)
 *     defaults: { ... }                 # any MonitorConfig key (src/detect/monitor-config.ts), over its defaults
 *     rules:                            # first match wins; settings override defaults
 *       - match: "checkout-latency:*"   # glob on the whole stream name: * any run of characters, ? one character
 *         matchRegex: "^payments:"      # or a JavaScript regular expression (unanchored); exactly one of the two
 *         settings: { ... }             # any MonitorConfig key
 *   checkpoint:
 *     store: directory                  # directory | kafka (kafka needs the kafka section for its connection)
 *     directory: ./modewatch-state      # store: directory; relative to the config file's directory
 *     topic: modewatch-checkpoints      # store: kafka; a compacted topic
 *     everyEvents: 100000               # checkpoint after this many events (1..1000000000) ...
 *     everySeconds: 30                  # ... or this many seconds (> 0, <= 86400), whichever comes first
 *   alerts:
 *     sinks:                            # default [{ type: log }]; [] sends alerts nowhere
 *       - { type: log }
 *       - { type: alertmanager, urls: [http://127.0.0.1:9093], resendSeconds: 60, severity: warning,
 *           labels: { team: checkout } }
 *       - { type: webhook, url: https://hooks.example/modewatch, tokenEnv: VAR }   # or tokenFile: path
 *       - { type: kafka, topic: modewatch-alerts }                                 # needs the kafka section
 *       # every sink takes an optional `name` (metrics label; default its type, then type-2, type-3, ...)
 *   http:
 *     listen: 127.0.0.1:9471            # host:port ([v6]:port); port 0 picks a free one
 *     webConfigFile: ./web-config.yml   # optional: TLS and basic auth (src/http/web-config.ts); must exist
 *     externalUrl: http://modewatch.example:9471   # optional: links in alerts
 *   logging:
 *     level: info                       # fatal | error | warn | info | debug | trace | silent
 *
 * Environment variables override the file and flags override the environment:
 *   MODEWATCH_KAFKA_BROKERS (comma list), MODEWATCH_KAFKA_GROUP_ID, MODEWATCH_HTTP_LISTEN,
 *   MODEWATCH_CHECKPOINT_DIRECTORY, MODEWATCH_LOG_LEVEL.
 */
import type { KafkaSasl } from '../ingest/kafka-client.js';
import type { MessageDecoding } from '../ingest/message-decoder.js';
import type { MonitorConfig } from '../detect/monitor-config.js';
import type { Secret } from './secret.js';

export const LOG_LEVELS = ['fatal', 'error', 'warn', 'info', 'debug', 'trace', 'silent'] as const;
export type LogLevel = (typeof LOG_LEVELS)[number];

export const SASL_MECHANISMS: readonly KafkaSasl['mechanism'][] = ['plain', 'scram-sha-256', 'scram-sha-512'];

export interface SaslConfig {
  mechanism: KafkaSasl['mechanism'];
  username: string;
  password: Secret;
}

/** A topic (by name or pattern) and how its messages are decoded. */
export interface TopicConfig {
  /** Exactly one of name and pattern is set. */
  name: string | null;
  pattern: RegExp | null;
  /** The decoding; its `topic` is filled in per actual topic by topicDecoding() (src/config/to-options.ts). */
  decoding: Omit<MessageDecoding, 'topic'>;
}

export interface KafkaConfig {
  brokers: string[];
  clientId: string;
  groupId: string;
  fromBeginning: boolean;
  /** How long the group waits for a silent member before giving its partitions to another (after a crash, say). */
  sessionTimeoutMs: number;
  /** Run the Kafka consumer on a thread of its own, so fetching and modelling overlap (default true). */
  consumerThread: boolean;
  ssl: boolean;
  sasl: SaslConfig | null;
  topics: TopicConfig[];
  deadLetterTopic: string | null;
}

export interface StreamRule {
  /** The glob as written, or null for a matchRegex rule. */
  match: string | null;
  /** The regular expression as written, or null for a glob rule. */
  matchRegex: string | null;
  /** What the stream name is tested against (the glob compiled, anchored at both ends). */
  regex: RegExp;
  /** The settings as written in the rule. */
  settings: Partial<MonitorConfig>;
  /** Defaults merged with the rule's settings: what a matching stream gets. Validated at load. */
  monitor: MonitorConfig;
}

export interface StreamsConfig {
  maxStreams: number;
  recentValues: number;
  /** The defaults as written. */
  defaults: Partial<MonitorConfig>;
  /** DEFAULT_MONITOR_CONFIG merged with the defaults: what a stream no rule matches gets. */
  monitor: MonitorConfig;
  rules: StreamRule[];
}

export interface CheckpointConfig {
  store: 'directory' | 'kafka';
  /** Absolute. */
  directory: string;
  topic: string;
  everyEvents: number;
  everySeconds: number;
}

export type SinkConfig =
  | { type: 'log'; name: string }
  | { type: 'alertmanager'; name: string; urls: string[]; resendSeconds: number; severity: string; labels: Record<string, string> }
  | { type: 'webhook'; name: string; url: string; token: Secret | null }
  | { type: 'kafka'; name: string; topic: string };

export type SinkType = SinkConfig['type'];

export interface AlertsConfig {
  sinks: SinkConfig[];
}

export interface HttpConfig {
  /** As given (host:port). */
  listen: string;
  /** Parsed from listen (IPv6 without brackets). */
  host: string;
  port: number;
  /** Absolute, or null. */
  webConfigFile: string | null;
  externalUrl: string | null;
}

export interface LoggingConfig {
  level: LogLevel;
}

export interface ModewatchConfig {
  /** The file it was loaded from (absolute), or null when there was none. */
  file: string | null;
  kafka: KafkaConfig | null;
  streams: StreamsConfig;
  checkpoint: CheckpointConfig;
  alerts: AlertsConfig;
  http: HttpConfig;
  logging: LoggingConfig;
}

/** Values given by flags; they override the environment, which overrides the file. */
export interface FlagOverrides {
  kafkaBrokers?: string[];
  kafkaGroupId?: string;
  httpListen?: string;
  checkpointDirectory?: string;
  logLevel?: string;
}

export type ConfigResult = { ok: true; config: ModewatchConfig } | { ok: false; problems: import('./problems.js').LoadProblem[] };

/** A config with every Secret replaced by "<redacted>" and every RegExp by its source: safe to log or print. */
export type Redacted<T> = T extends Secret
  ? string
  : T extends RegExp
    ? string
    : T extends readonly (infer U)[]
      ? Redacted<U>[]
      : T extends object
        ? { [K in keyof T]: Redacted<T[K]> }
        : T;

export type RedactedConfig = Redacted<ModewatchConfig>;
