/**
 * Dead-letter topic: raw records that were rejected (undecodable, out of range, ...) are copied, key, value and
 * headers as they came, to a Kafka topic with headers saying why and where from:
 *   modewatch-reason, modewatch-source-topic, modewatch-source-partition, modewatch-source-offset.
 *
 * publish() never blocks and never throws: records go to a bounded in-memory queue that one loop drains in
 * batches. When the queue is full the record is dropped and counted; when Kafka refuses a batch (after
 * kafkajs's own retries) its records are counted as failed. close() sends what is queued, bounded in time.
 */
import type { Admin, Producer, Message, IHeaders } from 'kafkajs';
import type { RawRecord } from './source.js';
import {
  createKafka,
  describeKafka,
  parsePartitionName,
  silentKafkaLogger,
  type KafkaConnectionOptions,
  type KafkaLogger,
} from './kafka-client.js';

export interface DeadLetterOptions extends KafkaConnectionOptions {
  /** The dead-letter topic; created (broker defaults) if it does not exist. */
  topic: string;
  /** Queue bound (default 10000 records). */
  maxQueue?: number;
  /** Records per produce request (default 500). */
  batchSize?: number;
  /** Upper bound on close()'s wait for the queue to drain (default 10000 ms). */
  closeTimeoutMs?: number;
  logger?: KafkaLogger;
}

export interface DeadLetterCounters {
  sent: number;
  failed: number;
  dropped: number;
  queued: number;
}

export const DLQ_HEADERS = {
  reason: 'modewatch-reason',
  topic: 'modewatch-source-topic',
  partition: 'modewatch-source-partition',
  offset: 'modewatch-source-offset',
} as const;

export class DeadLetterProducer {
  private readonly producer: Producer;
  private readonly admin: Admin;
  private readonly log: KafkaLogger;
  private readonly queue: Message[] = [];
  private readonly counts = { sent: 0, failed: 0, dropped: 0 };
  private draining: Promise<void> | null = null;
  private connected: Promise<void> | null = null;
  private closed = false;

  constructor(private readonly opts: DeadLetterOptions) {
    if (!/^[A-Za-z0-9._-]{1,249}$/.test(opts.topic)) throw new Error(`dead-letter topic "${opts.topic}" is not a valid Kafka topic name`);
    this.log = opts.logger ?? silentKafkaLogger;
    const kafka = createKafka(opts);
    this.producer = kafka.producer({ allowAutoTopicCreation: false });
    this.admin = kafka.admin();
  }

  /** Queues the record for the dead-letter topic. Returns at once; false when it was dropped (queue full or closed). */
  publish(record: RawRecord, reason: string): boolean {
    if (this.closed || this.queue.length >= (this.opts.maxQueue ?? 10_000)) {
      this.counts.dropped++;
      return false;
    }
    const headers: IHeaders = {};
    for (const [k, v] of Object.entries(record.headers)) if (v !== undefined) headers[k] = v;
    const kafkaPartition = parsePartitionName(record.partition);
    headers[DLQ_HEADERS.reason] = reason;
    headers[DLQ_HEADERS.topic] = record.topic;
    headers[DLQ_HEADERS.partition] =
      kafkaPartition && kafkaPartition.topic === record.topic ? String(kafkaPartition.partition) : record.partition;
    headers[DLQ_HEADERS.offset] = String(record.offset);
    this.queue.push({
      key: record.key,
      value: record.value === null ? null : typeof record.value === 'string' ? Buffer.from(record.value, 'utf8') : record.value,
      timestamp: record.timestamp > 0 ? String(record.timestamp) : undefined,
      headers,
    });
    if (!this.draining) this.draining = this.drain().finally(() => (this.draining = null));
    return true;
  }

  counters(): DeadLetterCounters {
    return { ...this.counts, queued: this.queue.length };
  }

  /** Sends what is queued (bounded by closeTimeoutMs; the rest counts as dropped), then disconnects. */
  async close(): Promise<void> {
    if (this.closed) return;
    this.closed = true;
    const limit = this.opts.closeTimeoutMs ?? 10_000;
    let timer: NodeJS.Timeout | undefined;
    await Promise.race([
      (async () => {
        while (this.draining) await this.draining;
      })(),
      new Promise<void>((res) => (timer = setTimeout(res, limit))),
    ]);
    clearTimeout(timer);
    this.counts.dropped += this.queue.splice(0).length;
    if (this.connected) {
      await this.connected.catch(() => {});
      await this.producer.disconnect();
      await this.admin.disconnect();
    }
  }

  private connect(): Promise<void> {
    this.connected ??= (async () => {
      this.log.info({ kafka: describeKafka(this.opts), topic: this.opts.topic }, 'dead-letter producer connecting');
      await this.admin.connect();
      const topics = await this.admin.listTopics();
      if (!topics.includes(this.opts.topic)) {
        await this.admin.createTopics({ topics: [{ topic: this.opts.topic }], waitForLeaders: true });
      }
      await this.producer.connect();
    })();
    return this.connected;
  }

  private async drain(): Promise<void> {
    try {
      await this.connect();
    } catch (e) {
      // Cannot reach Kafka: everything queued so far fails; the next publish tries to connect again.
      this.counts.failed += this.queue.splice(0).length;
      this.connected = null;
      await this.admin.disconnect().catch(() => {});
      this.log.warn({ err: errMessage(e) }, 'dead-letter producer could not connect');
      return;
    }
    while (this.queue.length > 0) {
      const batch = this.queue.splice(0, this.opts.batchSize ?? 500);
      try {
        await this.producer.send({ topic: this.opts.topic, messages: batch, acks: -1 });
        this.counts.sent += batch.length;
      } catch (e) {
        this.counts.failed += batch.length;
        this.log.warn({ err: errMessage(e), records: batch.length }, 'dead-letter send failed');
      }
    }
  }
}

function errMessage(e: unknown): string {
  return e instanceof Error ? e.message : String(e);
}
