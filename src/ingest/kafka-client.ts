/**
 * Shared kafkajs client setup for the Kafka source, the dead-letter producer and the Kafka checkpoint store:
 * connection options (brokers, TLS, SASL) and kafkajs's log lines routed to the caller's logger.
 * Secrets (the SASL password) are passed to kafkajs and never logged: describeKafka() is what logs may show.
 */
import type { LogEntry, SASLOptions } from 'kafkajs';
import { Kafka, logLevel } from './kafkajs.js';

/** A pino logger fits this shape; so does the silent default. */
export interface KafkaLogger {
  debug(obj: object, msg: string): void;
  info(obj: object, msg: string): void;
  warn(obj: object, msg: string): void;
  error(obj: object, msg: string): void;
}

export const silentKafkaLogger: KafkaLogger = { debug() {}, info() {}, warn() {}, error() {} };

export interface KafkaSasl {
  mechanism: 'plain' | 'scram-sha-256' | 'scram-sha-512';
  username: string;
  password: string;
}

export interface KafkaConnectionOptions {
  /** Bootstrap brokers, host:port. */
  brokers: string[];
  clientId: string;
  sasl?: KafkaSasl;
  /** TLS to the brokers with the system's CAs. */
  ssl?: boolean;
  /** Connection timeout in ms (default 3000). */
  connectionTimeoutMs?: number;
  /** Retries of a failed request before kafkajs gives up (kafkajs default 5, with exponential backoff). */
  retries?: number;
  logger?: KafkaLogger;
}

export function createKafka(opts: KafkaConnectionOptions): Kafka {
  if (opts.brokers.length === 0) throw new Error('Kafka: no brokers given');
  const logger = opts.logger ?? silentKafkaLogger;
  return new Kafka({
    clientId: opts.clientId,
    brokers: opts.brokers,
    ssl: opts.ssl === true,
    sasl: opts.sasl ? toKafkajsSasl(opts.sasl) : undefined,
    connectionTimeout: opts.connectionTimeoutMs ?? 3000,
    retry: opts.retries === undefined ? undefined : { retries: opts.retries },
    logLevel: logLevel.WARN,
    logCreator: () => (entry: LogEntry) => forwardLog(logger, entry),
  });
}

function toKafkajsSasl(s: KafkaSasl): SASLOptions {
  switch (s.mechanism) {
    case 'plain':
      return { mechanism: 'plain', username: s.username, password: s.password };
    case 'scram-sha-256':
      return { mechanism: 'scram-sha-256', username: s.username, password: s.password };
    case 'scram-sha-512':
      return { mechanism: 'scram-sha-512', username: s.username, password: s.password };
  }
}

/** What may be logged about a connection: brokers, client id, TLS on/off, SASL mechanism and user, never the password. */
export function describeKafka(opts: KafkaConnectionOptions): Record<string, unknown> {
  return {
    brokers: opts.brokers,
    clientId: opts.clientId,
    ssl: opts.ssl === true,
    sasl: opts.sasl ? { mechanism: opts.sasl.mechanism, username: opts.sasl.username } : undefined,
  };
}

function forwardLog(logger: KafkaLogger, entry: LogEntry): void {
  const { message, ...rest } = entry.log;
  // kafkajs log payloads carry broker, group and error details; drop anything that looks like a credential.
  const extra: Record<string, unknown> = { kafkajs: entry.namespace };
  for (const [k, v] of Object.entries(rest)) if (!/pass|secret|sasl|token/i.test(k)) extra[k] = v;
  const msg = `kafkajs: ${message}`;
  if (entry.level === logLevel.ERROR) logger.error(extra, msg);
  else if (entry.level === logLevel.WARN) logger.warn(extra, msg);
  else if (entry.level === logLevel.INFO) logger.info(extra, msg);
  else logger.debug(extra, msg);
}

/** Partition naming used by every modewatch Kafka component: `${topic}-${partition}`. */
export function partitionName(topic: string, partition: number): string {
  return `${topic}-${partition}`;
}

/** Inverse of partitionName: splits on the last '-' (topic names may contain '-'). Null if not of that form. */
export function parsePartitionName(name: string): { topic: string; partition: number } | null {
  const i = name.lastIndexOf('-');
  if (i <= 0) return null;
  const n = name.slice(i + 1);
  if (!/^\d+$/.test(n)) return null;
  return { topic: name.slice(0, i), partition: Number(n) };
}
