/**
 * The Kafka checkpoint store on a real broker: round trip, per-partition replacement with tombstones for
 * deleted streams, and a half-written save (stream records without their positions record, as a crash leaves
 * them) that must not be seen, neither at once nor after later saves.
 */
import { randomBytes } from 'node:crypto';
import { Kafka, logLevel } from '../src/ingest/kafkajs.js';
// After the line above, so that kafkajs is first loaded with modewatch's record decoder.
import { ConfigResourceTypes } from 'kafkajs';
import { describe, expect, it } from 'vitest';
import { KafkaCheckpointStore, streamKey } from '../src/state/kafka-store.js';
import type { Checkpoint } from '../src/state/store.js';
import { SAMPLE_CHECKPOINT } from './support/checkpoint-fixture.js';
import { useSharedBroker } from './support/kafka-broker.js';

const broker = useSharedBroker();
const uniq = () => randomBytes(4).toString('hex');

const cp1: Checkpoint = SAMPLE_CHECKPOINT;

/** Every record of the topic, in log order, read with a plain kafkajs consumer. */
async function readRaw(brokers: string[], topic: string): Promise<{ key: string; value: string | null }[]> {
  const kafka = new Kafka({ clientId: 'raw-reader', brokers, logLevel: logLevel.NOTHING });
  const admin = kafka.admin();
  await admin.connect();
  const end = Number((await admin.fetchTopicOffsets(topic))[0]!.high);
  await admin.disconnect();
  const consumer = kafka.consumer({ groupId: `raw-${uniq()}` });
  const out: { key: string; value: string | null }[] = [];
  await consumer.connect();
  await consumer.subscribe({ topics: [topic], fromBeginning: true });
  await new Promise<void>((resolve, reject) => {
    const t = setTimeout(() => reject(new Error('raw read timed out')), 20_000);
    void consumer.run({
      eachMessage: async ({ message }) => {
        out.push({ key: message.key?.toString() ?? '', value: message.value === null ? null : message.value.toString() });
        if (Number(message.offset) + 1 >= end) {
          clearTimeout(t);
          resolve();
        }
      },
    });
  });
  await consumer.disconnect();
  return out;
}

describe('KafkaCheckpointStore', () => {
  it('creates a compacted topic and round-trips a checkpoint through a fresh store', async (ctx) => {
    const { brokers } = broker.get(ctx);
    const topic = `state-${uniq()}`;
    const a = new KafkaCheckpointStore({ brokers, clientId: 'store-a', topic });
    try {
      expect(await a.load()).toEqual({ positions: {}, streams: [], counters: {} });
      await a.save(cp1);
    } finally {
      await a.close();
    }
    const b = new KafkaCheckpointStore({ brokers, clientId: 'store-b', topic });
    try {
      expect(await b.load()).toEqual(cp1);
      expect(await b.load(['lat-1'])).toEqual({ positions: { 'lat-1': 7 }, counters: { 'lat-1': { events: 7 } }, streams: [cp1.streams[2]] });
    } finally {
      await b.close();
    }
    const kafka = new Kafka({ clientId: 'cfg', brokers, logLevel: logLevel.NOTHING });
    const admin = kafka.admin();
    await admin.connect();
    const cfg = await admin.describeConfigs({ includeSynonyms: false, resources: [{ type: ConfigResourceTypes.TOPIC, name: topic }] });
    await admin.disconnect();
    const policy = cfg.resources[0]!.configEntries.find((e) => e.configName === 'cleanup.policy');
    expect(policy?.configValue).toBe('compact');
  });

  it('replaces a saved partition whole: changed streams rewritten, missing ones tombstoned, others kept', async (ctx) => {
    const { brokers } = broker.get(ctx);
    const topic = `state-${uniq()}`;
    const a = new KafkaCheckpointStore({ brokers, clientId: 'store-a', topic });
    try {
      await a.save(cp1);
      await a.save({
        positions: { 'lat-0': 300 },
        counters: { 'lat-0': { events: 290 } },
        streams: [{ stream: 'checkout', partition: 'lat-0', state: '{"v":1,"k":3}' }],
      });
    } finally {
      await a.close();
    }
    const b = new KafkaCheckpointStore({ brokers, clientId: 'store-b', topic });
    try {
      const back = await b.load();
      expect(back.positions).toEqual({ 'lat-0': 300, 'lat-1': 7 });
      expect(back.counters['lat-0']).toEqual({ events: 290 });
      expect(back.streams).toEqual([
        { stream: 'checkout', partition: 'lat-0', state: '{"v":1,"k":3}' },
        { stream: 'login', partition: 'lat-1', state: '{"v":1,"k":3}' },
      ]);
    } finally {
      await b.close();
    }
    const raw = await readRaw(brokers, topic);
    // 'search' was deleted: the last record of each of its two slot keys is a tombstone (null value).
    for (const slot of [0, 1] as const) {
      const last = raw.filter((r) => r.key === streamKey(slot, 'lat-0', 'search')).at(-1);
      if (last) expect(last.value).toBeNull();
    }
    expect(raw.some((r) => r.key.endsWith('/search') && r.value === null)).toBe(true);
  });

  it('ignores a half-written save, now and after later saves that leave the stream unchanged', async (ctx) => {
    const { brokers } = broker.get(ctx);
    const topic = `state-${uniq()}`;
    const a = new KafkaCheckpointStore({ brokers, clientId: 'store-a', topic });
    try {
      await a.save(cp1); // seq 1, every stream in slot 0
    } finally {
      await a.close();
    }
    // A crashed writer's save 2 of lat-0: stream records written, positions record never written.
    const kafka = new Kafka({ clientId: 'crashed-writer', brokers, logLevel: logLevel.NOTHING });
    const producer = kafka.producer();
    await producer.connect();
    const ghost = (stream: string) => ({
      key: streamKey(1, 'lat-0', stream),
      value: JSON.stringify({ v: 1, partition: 'lat-0', stream, seq: 2, writer: 'crashed', state: '{"ghost":true}' }),
    });
    await producer.send({ topic, messages: [ghost('checkout'), ghost('search'), ghost('newcomer')], acks: -1 });
    await producer.disconnect();

    const b = new KafkaCheckpointStore({ brokers, clientId: 'store-b', topic });
    try {
      expect(await b.load()).toEqual(cp1);
      // The next owner saves lat-0 twice with 'checkout' unchanged: its committed version stays in slot 0,
      // and the ghost in slot 1 must neither come back at seq 3 nor at any later seq.
      const next: Checkpoint = {
        positions: { 'lat-0': 130 },
        counters: { 'lat-0': { events: 128 } },
        streams: [
          { stream: 'checkout', partition: 'lat-0', state: '{"v":1,"k":2}' },
          { stream: 'search', partition: 'lat-0', state: '{"v":1,"k":9}' },
        ],
      };
      await b.save(next);
      await b.save({ ...next, positions: { 'lat-0': 140 } });
    } finally {
      await b.close();
    }
    const c = new KafkaCheckpointStore({ brokers, clientId: 'store-c', topic });
    try {
      const back = await c.load(['lat-0']);
      expect(back.positions).toEqual({ 'lat-0': 140 });
      expect(back.streams).toEqual([
        { stream: 'checkout', partition: 'lat-0', state: '{"v":1,"k":2}' },
        { stream: 'search', partition: 'lat-0', state: '{"v":1,"k":9}' },
      ]);
    } finally {
      await c.close();
    }
  });
});
