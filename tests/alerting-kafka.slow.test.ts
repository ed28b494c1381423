/**
 * The Kafka alert sink on a real broker (tests/support/kafka-broker.ts; kafkajs 2.2.4):
 * transitions land on the alerts topic as JSON, keyed by stream, so one stream's
 * transitions share a partition and keep their order; a producer that cannot send is
 * retried and then counted as failed.
 */
import { randomBytes } from 'node:crypto';
import type { KafkaMessage } from 'kafkajs';
import { Kafka, logLevel } from '../src/ingest/kafkajs.js';
import { describe, expect, it } from 'vitest';
import type { AlertTransition } from '../src/detect/alert.js';
import { KafkaSink } from '../src/alerting/kafka-sink.js';
import { useSharedBroker } from './support/kafka-broker.js';

const broker = useSharedBroker();
const uniq = () => randomBytes(4).toString('hex');

function transition(stream: string, state: AlertTransition['state'], offset: number): AlertTransition {
  return {
    key: `${stream}/weight_shift/-`,
    stream,
    kind: 'weight_shift',
    state,
    ts: 1_700_000_000_000 + offset * 1000,
    offset,
    startsAt: 1_700_000_000_000,
    endsAt: state === 'resolved' ? 1_700_000_000_000 + offset * 1000 : null,
    resolution: state === 'resolved' ? 'recovered' : null,
    evidence: {
      statistic: 'weight_chi2',
      value: 31.5,
      threshold: 16.3,
      componentId: null,
      before: [{ id: 0, weight: 1, location: 12, spread: 2, mean: 12 }],
      after: [{ id: 0, weight: 1, location: 12, spread: 2, mean: 12 }],
      firstEvidenceTs: 1_700_000_000_000,
      firstEvidenceOffset: offset - 1,
      summary: `invented example: weights of ${stream} moved`,
    },
  };
}

async function readAll(kafka: Kafka, topic: string, count: number): Promise<{ partition: number; m: KafkaMessage }[]> {
  const consumer = kafka.consumer({ groupId: `reader-${uniq()}` });
  const out: { partition: number; m: KafkaMessage }[] = [];
  await consumer.connect();
  try {
    await consumer.subscribe({ topics: [topic], fromBeginning: true });
    await new Promise<void>((resolve, reject) => {
      const t = setTimeout(() => reject(new Error(`read ${out.length} of ${count} records in time`)), 30_000);
      void consumer.run({
        eachMessage: async ({ partition, message }) => {
          out.push({ partition, m: message });
          if (out.length >= count) {
            clearTimeout(t);
            resolve();
          }
        },
      });
    });
  } finally {
    await consumer.disconnect();
  }
  return out;
}

describe('KafkaSink', () => {
  it('produces transitions keyed by stream, in order per stream', async (ctx) => {
    const { brokers } = broker.get(ctx);
    const kafka = new Kafka({ clientId: 'alerts-test', brokers, logLevel: logLevel.NOTHING });
    const topic = `alerts-${uniq()}`;
    const admin = kafka.admin();
    await admin.connect();
    await admin.createTopics({ topics: [{ topic, numPartitions: 3, replicationFactor: 1 }], waitForLeaders: true });
    await admin.disconnect();
    const producer = kafka.producer();
    await producer.connect();
    const sink = new KafkaSink({ producer, topic });
    const sent: AlertTransition[] = [];
    try {
      for (let i = 0; i < 12; i++) {
        const stream = ['checkout', 'search', 'upload'][i % 3];
        const t = transition(stream, i < 9 ? 'firing' : 'resolved', i);
        sent.push(t);
        sink.publish(t);
      }
      await sink.close();
    } finally {
      await producer.disconnect();
    }
    expect(sink.stats()).toEqual({ delivered: 12, failed: 0, dropped: 0, queueLength: 0 });

    const got = await readAll(kafka, topic, 12);
    expect(got).toHaveLength(12);
    const byStream = new Map<string, { partition: number; t: AlertTransition }[]>();
    for (const { partition, m } of got) {
      const t = JSON.parse(m.value!.toString()) as AlertTransition;
      expect(m.key!.toString()).toBe(t.stream);
      expect(m.headers?.kind?.toString()).toBe('weight_shift');
      expect(m.headers?.state?.toString()).toBe(t.state);
      expect(m.timestamp).toBe(String(t.ts));
      byStream.set(t.stream, [...(byStream.get(t.stream) ?? []), { partition, t }]);
    }
    for (const [stream, records] of byStream) {
      expect(new Set(records.map((r) => r.partition)).size, stream).toBe(1);
      expect(records.map((r) => r.t)).toEqual(sent.filter((s) => s.stream === stream));
    }
  });

  it('counts a failure when the producer cannot send, after its retries', async (ctx) => {
    const { brokers } = broker.get(ctx);
    const kafka = new Kafka({ clientId: 'alerts-test-2', brokers, logLevel: logLevel.NOTHING });
    const producer = kafka.producer();
    await producer.connect();
    await producer.disconnect(); // sending now fails at once
    const warnings: object[] = [];
    const sink = new KafkaSink({
      producer,
      topic: `alerts-${uniq()}`,
      delivery: { maxAttempts: 3, baseDelayMs: 10, log: { warn: (o) => warnings.push(o) } },
    });
    sink.publish(transition('checkout', 'firing', 1));
    await sink.close();
    expect(sink.stats()).toEqual({ delivered: 0, failed: 1, dropped: 0, queueLength: 0 });
    expect(warnings).toHaveLength(3);
  });
});
