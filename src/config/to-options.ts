/**
 * From the loaded configuration to the option types of the rooms that do the work. These are the only places
 * where secrets are revealed, and only into the option objects the client libraries take.
 */
import type { AlertmanagerSinkOptions } from '../alerting/alertmanager-sink.js';
import type { WebhookSinkOptions } from '../alerting/webhook-sink.js';
import type { DeadLetterOptions } from '../ingest/dead-letter.js';
import type { KafkaConnectionOptions } from '../ingest/kafka-client.js';
import type { KafkaSourceOptions } from '../ingest/kafka-source.js';
import type { MessageDecoding } from '../ingest/message-decoder.js';
import type { KafkaStoreOptions } from '../state/kafka-store.js';
import type { KafkaConfig, ModewatchConfig, SinkConfig, TopicConfig } from './schema.js';

export function kafkaConnectionOptions(k: KafkaConfig): KafkaConnectionOptions {
  return {
    brokers: [...k.brokers],
    clientId: k.clientId,
    ssl: k.ssl,
    sasl: k.sasl ? { mechanism: k.sasl.mechanism, username: k.sasl.username, password: k.sasl.password.reveal() } : undefined,
  };
}

/** Topics by name or by pattern (the loader refuses a mix). */
export function kafkaSourceOptions(k: KafkaConfig): KafkaSourceOptions {
  const topics = k.topics.every((t) => t.name !== null) ? k.topics.map((t) => t.name as string) : k.topics.map((t) => t.pattern as RegExp);
  return { ...kafkaConnectionOptions(k), groupId: k.groupId, topics, fromBeginning: k.fromBeginning, sessionTimeoutMs: k.sessionTimeoutMs, heartbeatIntervalMs: Math.max(1000, Math.floor(k.sessionTimeoutMs / 10)) };
}

/** The topic entry that covers a topic the consumer got records from: by name, else the first matching pattern. */
export function topicEntry(k: KafkaConfig, topic: string): TopicConfig | null {
  return k.topics.find((t) => t.name === topic) ?? k.topics.find((t) => t.pattern !== null && t.pattern.test(topic)) ?? null;
}

/** The decoding of one actual topic (a pattern entry's decoding serves every topic it matches). */
export function topicDecoding(entry: TopicConfig, topic: string): MessageDecoding {
  return { ...entry.decoding, topic };
}

export function deadLetterOptions(k: KafkaConfig): DeadLetterOptions | null {
  return k.deadLetterTopic === null ? null : { ...kafkaConnectionOptions(k), topic: k.deadLetterTopic };
}

/** Options of the Kafka checkpoint store, or null when the store is a directory. */
export function kafkaStoreOptions(c: ModewatchConfig): KafkaStoreOptions | null {
  if (c.checkpoint.store !== 'kafka' || c.kafka === null) return null;
  return { ...kafkaConnectionOptions(c.kafka), topic: c.checkpoint.topic };
}

export function alertmanagerSinkOptions(s: Extract<SinkConfig, { type: 'alertmanager' }>, c: ModewatchConfig): AlertmanagerSinkOptions {
  return {
    name: s.name,
    urls: [...s.urls],
    severity: s.severity,
    labels: { ...s.labels },
    resendIntervalMs: s.resendSeconds * 1000,
    externalUrl: c.http.externalUrl ?? undefined,
  };
}

export function webhookSinkOptions(s: Extract<SinkConfig, { type: 'webhook' }>): WebhookSinkOptions {
  return { name: s.name, url: s.url, bearerToken: s.token?.reveal() };
}
