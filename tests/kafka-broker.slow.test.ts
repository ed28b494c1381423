/**
 * The test broker is a real Kafka: a kafkajs 2.2.4 client can create a topic, produce and consume through a
 * consumer group against it.
 */
import { Kafka, logLevel } from 'kafkajs';
import { describe, expect, it } from 'vitest';
import { freePorts, parseBrokerList } from '../src/devtools/kafka-broker.js';
import { useSharedBroker } from './support/kafka-broker.js';

const broker = useSharedBroker();

describe('test Kafka broker', () => {
  it('answers describeCluster and round-trips records through a consumer group', async (ctx) => {
    const { brokers } = broker.get(ctx);
    const kafka = new Kafka({ clientId: 'broker-test', brokers, logLevel: logLevel.NOTHING });
    const admin = kafka.admin();
    await admin.connect();
    const producer = kafka.producer();
    const consumer = kafka.consumer({ groupId: 'broker-test-group' });
    try {
      const cluster = await admin.describeCluster();
      expect(cluster.brokers.length).toBeGreaterThanOrEqual(1);
      expect(cluster.clusterId).toMatch(/\S/);

      await admin.createTopics({ topics: [{ topic: 'roundtrip', numPartitions: 2 }], waitForLeaders: true });
      await producer.connect();
      const sent = Array.from({ length: 20 }, (_, i) => ({ key: `k${i % 4}`, value: `v${i}`, headers: { n: String(i) } }));
      await producer.send({ topic: 'roundtrip', messages: sent });

      await consumer.connect();
      await consumer.subscribe({ topics: ['roundtrip'], fromBeginning: true });
      const got: { key: string; value: string; n: string; partition: number }[] = [];
      await new Promise<void>((resolve, reject) => {
        const timer = setTimeout(() => reject(new Error(`only ${got.length}/20 records within 30 s`)), 30_000);
        void consumer.run({
          eachMessage: async ({ partition, message }) => {
            got.push({
              key: message.key?.toString() ?? '',
              value: message.value?.toString() ?? '',
              n: String(message.headers?.n ?? ''),
              partition,
            });
            if (got.length === 20) {
              clearTimeout(timer);
              resolve();
            }
          },
        });
      });
      expect(got.map((g) => g.value).sort()).toEqual(sent.map((s) => s.value).sort());
      // The default partitioner keeps one key on one partition (kafkajs 2.2.4, murmur2 as in the Java client).
      for (const key of ['k0', 'k1', 'k2', 'k3']) {
        expect(new Set(got.filter((g) => g.key === key).map((g) => g.partition)).size).toBe(1);
      }
      expect(got.every((g) => g.value === `v${g.n}`)).toBe(true);
    } finally {
      await consumer.disconnect();
      await producer.disconnect();
      await admin.disconnect();
    }
  });

  it('reports how it was started and how long that took', (ctx) => {
    const handle = broker.get(ctx);
    expect(handle.how).toMatch(/MODEWATCH_KAFKA_BROKERS|testcontainers|jars/);
    console.info(`[kafka] broker start took ${broker.startMs()} ms (${handle.how})`);
  });

  it('hands out different ports for the listeners of one broker', async () => {
    // Two ports taken one after the other can be the same one; Kafka then refuses to format its storage.
    for (let i = 0; i < 50; i++) {
      const [a, b] = await freePorts(2);
      expect(a).not.toBe(b);
      expect(a * b).toBeGreaterThan(0);
    }
  });

  it('rejects a malformed MODEWATCH_KAFKA_BROKERS with a message naming the entry', () => {
    expect(() => parseBrokerList('127.0.0.1:9092,nohost')).toThrow(/"nohost" is not host:port/);
    expect(parseBrokerList(' 127.0.0.1:9092 , localhost:9093 ')).toEqual(['127.0.0.1:9092', 'localhost:9093']);
  });
});
