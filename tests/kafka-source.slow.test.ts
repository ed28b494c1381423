/**
 * KafkaSource and DeadLetterProducer on a real broker (kafkajs 2.2.4 against Apache Kafka 3.9):
 * batches, explicit commits, resume from the committed group offset, seek to offsets onAssigned returns,
 * lag, pattern subscriptions, and dead-letter records with their headers.
 */
import { randomBytes } from 'node:crypto';
import { describe, expect, it } from 'vitest';
import { DeadLetterProducer, DLQ_HEADERS } from '../src/ingest/dead-letter.js';
import { KafkaSource } from '../src/ingest/kafka-source.js';
import { Kafka, logLevel, recordDecoderOwner } from '../src/ingest/kafkajs.js';
import { copyRecords, type RawRecord, type SourceHandlers } from '../src/ingest/source.js';
import { useSharedBroker } from './support/kafka-broker.js';

const broker = useSharedBroker();
const uniq = () => randomBytes(4).toString('hex');

async function produce(brokers: string[], topic: string, from: number, count: number): Promise<void> {
  const kafka = new Kafka({ clientId: 'producer', brokers, logLevel: logLevel.NOTHING });
  const p = kafka.producer();
  await p.connect();
  await p.send({
    topic,
    messages: Array.from({ length: count }, (_, i) => ({ key: `s${(from + i) % 5}`, value: JSON.stringify({ n: from + i }) })),
  });
  await p.disconnect();
}

async function waitFor(what: string, cond: () => boolean, ms = 30_000): Promise<void> {
  const t0 = Date.now();
  while (!cond()) {
    if (Date.now() - t0 > ms) throw new Error(`timed out after ${ms} ms waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 50));
  }
}

/** Handlers that record everything; onAssigned answers with `offsets`. */
function recorder(offsets: Map<string, number> = new Map()) {
  const records: RawRecord[] = [];
  const assigned: string[][] = [];
  const revoked: string[][] = [];
  const fatal: Error[] = [];
  const handlers: SourceHandlers = {
    onBatch: async (b) => {
      const rs = copyRecords(b);
      for (const r of rs) expect(r.partition).toBe(b.partition);
      records.push(...rs);
    },
    onAssigned: async (ps) => {
      assigned.push(ps);
      return offsets;
    },
    onRevoked: async (ps) => {
      revoked.push(ps);
    },
    onFatal: (e) => fatal.push(e),
  };
  const next = () => {
    const m = new Map<string, number>();
    for (const r of records) m.set(r.partition, Math.max(m.get(r.partition) ?? 0, r.offset + 1));
    return m;
  };
  return { handlers, records, assigned, revoked, fatal, next };
}

const ns = (rs: RawRecord[]) => rs.map((r) => (JSON.parse(String(r.value)) as { n: number }).n).sort((a, b) => a - b);
const range = (a: number, b: number) => Array.from({ length: b - a }, (_, i) => a + i);

describe('KafkaSource', () => {
  it('creates a missing topic, delivers batches, commits, and resumes from the committed offsets after a restart', async (ctx) => {
    const { brokers } = broker.get(ctx);
    const topic = `events-${uniq()}`;
    const groupId = `g-${uniq()}`;
    const opts = { brokers, clientId: 'src', groupId, topics: [topic], createTopics: { numPartitions: 2 }, sessionTimeoutMs: 10_000 };

    const r1 = recorder();
    const s1 = new KafkaSource(opts);
    expect(s1.ready()).toBe(false);
    await s1.start(r1.handlers);
    expect(s1.ready()).toBe(true);
    expect(r1.assigned.flat().sort()).toEqual([`${topic}-0`, `${topic}-1`]);
    await produce(brokers, topic, 0, 100);
    await waitFor('100 records', () => r1.records.length >= 100);
    expect(ns(r1.records)).toEqual(range(0, 100));
    for (const p of [`${topic}-0`, `${topic}-1`]) {
      const offs = r1.records.filter((r) => r.partition === p).map((r) => r.offset);
      expect(offs).toEqual(range(0, offs.length)); // in order, no gap, no duplicate
    }
    expect(r1.records.every((r) => r.topic === topic && r.key !== null && r.timestamp > 0)).toBe(true);
    await s1.commit(r1.next());
    await s1.stop();
    expect(r1.revoked.flat().sort()).toEqual([`${topic}-0`, `${topic}-1`]);
    expect(s1.ready()).toBe(false);

    const kafka = new Kafka({ clientId: 'check', brokers, logLevel: logLevel.NOTHING });
    const admin = kafka.admin();
    await admin.connect();
    const committed = await admin.fetchOffsets({ groupId, topics: [topic] });
    await admin.disconnect();
    const byName = new Map(committed[0]!.partitions.map((p) => [`${topic}-${p.partition}`, Number(p.offset)]));
    expect(byName).toEqual(r1.next());

    // Restart: no offsets from the handler, so the committed ones apply; only the new records arrive.
    await produce(brokers, topic, 100, 20);
    const r2 = recorder();
    const s2 = new KafkaSource(opts);
    await s2.start(r2.handlers);
    try {
      await waitFor('20 new records', () => r2.records.length >= 20);
      await new Promise((r) => setTimeout(r, 500)); // nothing more may come
      expect(ns(r2.records)).toEqual(range(100, 120));
    } finally {
      await s2.stop();
    }
  });

  it('reads records with our record decoder exactly as they were produced: keys, values, timestamps, headers, offsets', async (ctx) => {
    // kafkajs was first loaded through src/ingest/kafkajs.ts in this process, so kafkajs decodes with ours.
    expect(recordDecoderOwner).toBe('modewatch');
    const { brokers } = broker.get(ctx);
    const topic = `decoded-${uniq()}`;
    const kafka = new Kafka({ clientId: 'producer', brokers, logLevel: logLevel.NOTHING });
    const admin = kafka.admin();
    await admin.connect();
    await admin.createTopics({ topics: [{ topic, numPartitions: 1 }], waitForLeaders: true });
    await admin.disconnect();
    const t0 = Date.UTC(2026, 0, 1);
    const sent = Array.from({ length: 300 }, (_, i) => ({
      key: i % 10 === 0 ? null : `svc-${i % 7}`,
      value: i % 25 === 3 ? null : i % 25 === 4 ? '' : JSON.stringify({ n: i, v: 'é' }),
      // Out of order on purpose: a batch's timestamp deltas can be negative.
      timestamp: String(t0 + (i % 3 === 0 ? -i : i) * 1000),
      headers: i % 4 === 1 ? { trace: `t${i}`, region: 'west' } : undefined,
    }));
    const p = kafka.producer();
    await p.connect();
    for (let i = 0; i < sent.length; i += 100) await p.send({ topic, messages: sent.slice(i, i + 100) });
    await p.disconnect();

    const r = recorder();
    const s = new KafkaSource({ brokers, clientId: 'src', groupId: `g-${uniq()}`, topics: [topic], fromBeginning: true });
    await s.start(r.handlers);
    try {
      await waitFor('300 records', () => r.records.length >= 300);
    } finally {
      await s.stop();
    }
    expect(r.records.map((x) => x.offset)).toEqual(range(0, 300));
    r.records.forEach((x, i) => {
      const m = sent[i];
      expect(x.key === null ? null : x.key.toString()).toBe(m.key);
      expect(x.value === null ? null : x.value.toString()).toBe(m.value);
      expect(x.timestamp).toBe(Number(m.timestamp));
      expect(Object.fromEntries(Object.entries(x.headers).map(([k, v]) => [k, String(v)]))).toEqual(m.headers ?? {});
    });
  });

  it('seeks to the offsets onAssigned returns and reports lag until it has caught up', async (ctx) => {
    const { brokers } = broker.get(ctx);
    const topic = `lag-${uniq()}`;
    const r = recorder(new Map([[`${topic}-0`, 10]]));
    let release: () => void = () => {};
    const gate = new Promise<void>((res) => (release = res));
    const inner = r.handlers.onBatch;
    r.handlers.onBatch = async (b) => {
      await gate;
      await inner(b);
    };
    const s = new KafkaSource({ brokers, clientId: 'src', groupId: `g-${uniq()}`, topics: [topic], createTopics: { numPartitions: 1 }, lagRefreshMs: 200 });
    await s.start(r.handlers);
    try {
      await produce(brokers, topic, 0, 50);
      // Held at offset 10 with 50 records in the log: lag 40 once the high watermark is known.
      await waitFor('lag 40', () => s.lag().get(`${topic}-0`) === 40);
      release();
      await waitFor('40 records', () => r.records.length >= 40);
      expect(r.records[0]!.offset).toBe(10);
      expect(ns(r.records)).toEqual(range(10, 50));
      await waitFor('lag 0', () => s.lag().get(`${topic}-0`) === 0);
    } finally {
      release();
      await s.stop();
    }
  });

  it('subscribes by pattern to every matching topic', async (ctx) => {
    const { brokers } = broker.get(ctx);
    const id = uniq();
    const kafka = new Kafka({ clientId: 'admin', brokers, logLevel: logLevel.NOTHING });
    const admin = kafka.admin();
    await admin.connect();
    await admin.createTopics({ waitForLeaders: true, topics: [{ topic: `pat.a.${id}` }, { topic: `pat.b.${id}` }, { topic: `other.${id}` }] });
    await admin.disconnect();
    await produce(brokers, `pat.a.${id}`, 0, 5);
    await produce(brokers, `pat.b.${id}`, 5, 5);
    await produce(brokers, `other.${id}`, 10, 5);
    const r = recorder();
    const s = new KafkaSource({ brokers, clientId: 'src', groupId: `g-${uniq()}`, topics: [new RegExp(`^pat\\..*\\.${id}$`)] });
    await s.start(r.handlers);
    try {
      await waitFor('10 records', () => r.records.length >= 10);
      await new Promise((res) => setTimeout(res, 500));
      expect(ns(r.records)).toEqual(range(0, 10));
      expect(new Set(r.records.map((x) => x.partition))).toEqual(new Set([`pat.a.${id}-0`, `pat.b.${id}-0`]));
    } finally {
      await s.stop();
    }
  });

  it('rejects bad options with a message saying what is wrong', () => {
    const base = { brokers: ['127.0.0.1:1'], clientId: 'x', groupId: 'g' };
    expect(() => new KafkaSource({ ...base, topics: [] })).toThrow(/no topics/);
    expect(() => new KafkaSource({ ...base, topics: ['bad topic'] })).toThrow(/"bad topic" is not a valid Kafka topic name/);
    expect(() => new KafkaSource({ ...base, groupId: '', topics: ['t'] })).toThrow(/groupId is empty/);
  });
});

describe('DeadLetterProducer', () => {
  it('sends rejected records with the reason and their origin in headers, without blocking the caller', async (ctx) => {
    const { brokers } = broker.get(ctx);
    const dlq = `dlq-${uniq()}`;
    const d = new DeadLetterProducer({ brokers, clientId: 'dlq', topic: dlq, maxQueue: 3 });
    const rec = (i: number): RawRecord => ({
      partition: 'latency-3',
      offset: 40 + i,
      key: Buffer.from(`k${i}`),
      value: `not json ${i}`,
      timestamp: 1_700_000_000_000 + i,
      headers: { trace: `t${i}` },
      topic: 'latency',
    });
    const t0 = performance.now();
    const accepted = [0, 1, 2, 3].map((i) => d.publish(rec(i), 'unparseable'));
    expect(performance.now() - t0).toBeLessThan(50); // publish only queues
    expect(accepted).toEqual([true, true, true, false]); // queue bound 3: the fourth is dropped
    await d.close();
    expect(d.counters()).toEqual({ sent: 3, failed: 0, dropped: 1, queued: 0 });

    const kafka = new Kafka({ clientId: 'dlq-reader', brokers, logLevel: logLevel.NOTHING });
    const c = kafka.consumer({ groupId: `g-${uniq()}` });
    await c.connect();
    await c.subscribe({ topics: [dlq], fromBeginning: true });
    const got: { key: string; value: string; headers: Record<string, string> }[] = [];
    await new Promise<void>((resolve, reject) => {
      const t = setTimeout(() => reject(new Error('dlq read timed out')), 20_000);
      void c.run({
        eachMessage: async ({ message }) => {
          const headers: Record<string, string> = {};
          for (const [k, v] of Object.entries(message.headers ?? {})) headers[k] = String(v);
          got.push({ key: String(message.key), value: String(message.value), headers });
          if (got.length === 3) {
            clearTimeout(t);
            resolve();
          }
        },
      });
    });
    await c.disconnect();
    expect(got.map((g) => g.value)).toEqual(['not json 0', 'not json 1', 'not json 2']);
    expect(got[1]!.key).toBe('k1');
    expect(got[1]!.headers).toEqual({
      trace: 't1',
      [DLQ_HEADERS.reason]: 'unparseable',
      [DLQ_HEADERS.topic]: 'latency',
      [DLQ_HEADERS.partition]: '3',
      [DLQ_HEADERS.offset]: '41',
    });
  });

  it('counts records as failed when Kafka cannot be reached, and still returns at once', async () => {
    const d = new DeadLetterProducer({ brokers: ['127.0.0.1:1'], clientId: 'dlq', topic: 'dlq', connectionTimeoutMs: 200, retries: 1, closeTimeoutMs: 20_000 });
    d.publish({ partition: 'p-0', offset: 1, key: null, value: 'x', timestamp: 0, headers: {}, topic: 'p' }, 'bad');
    await d.close();
    expect(d.counters()).toMatchObject({ sent: 0, failed: 1, queued: 0 });
  });
});
