/**
 * Checkpoints in a compacted Kafka topic, shared by every modewatch process of a consumer group.
 *
 * Records (keys are UTF-8 strings, values JSON; the topic is created with cleanup.policy=compact):
 *   p/<partition>                  positions record of a source partition: {seq, writer, position, counters}
 *   s<slot>/<partition>/<stream>   a stream's snapshot {seq, writer, state} or a deletion marker {seq, writer, deleted}
 *   <any key> -> null              a tombstone; compaction then drops the key for good.
 * All records of one source partition go to the same partition of the state topic, so their order in the
 * log is the order they were written.
 *
 * Why this shape: a save writes many records and Kafka has no multi-record atomicity outside transactions
 * (which kafkajs 2.2.4 does not expose to a plain producer in a way that a reader without read_committed can
 * rely on), so the positions record is the commit point:
 *  1. Each save of partition P gets a sequence number seq, higher than any seq this process has seen for P.
 *     The stream records of that save are written first, each carrying seq and the writer's random id.
 *  2. When they are all acknowledged, the positions record (offsets and counters) with the same seq and
 *     writer is written. A save that dies before step 2 never happened as far as a load is concerned.
 *  3. A load reads the topic from the beginning to the end offsets it found when it started and, per
 *     partition, takes the positions record as the committed state C. A stream record belongs to C when its
 *     seq < C.seq, or seq = C.seq and it was written by C's writer (this shuts out records that a concurrent
 *     or abandoned save wrote under the same seq).
 * Compaction keeps only the latest record of a key, so a stream record of an abandoned save would erase the
 * committed version if both used the same key. Hence two slots per stream (double buffering): a save writes a
 * stream into the slot that does NOT hold its committed version, which survives compaction until a later
 * committed save supersedes it. A load marks slots holding records that belong to no committed save as
 * dirty, and the next save of that partition tombstones them before it commits, so a stale record can never
 * become "older than C" later on. Deleting a stream is a deletion marker in the free slot (committed with
 * the positions record), then tombstones for both slots, the data slot first so that a crash in between
 * cannot bring the stream back.
 * Unchanged streams (same state text as the committed one) are not rewritten. One writer per partition is
 * assumed (the consumer group gives that, except in the window of a rebalance; see kafka-source.ts).
 */
import { createHash, randomBytes } from 'node:crypto';
import type { Admin, Kafka, Message, Producer } from 'kafkajs';
import {
  createKafka,
  describeKafka,
  silentKafkaLogger,
  type KafkaConnectionOptions,
  type KafkaLogger,
} from '../ingest/kafka-client.js';
import type { Checkpoint, CheckpointStore } from './store.js';
import { counters, int, joinCheckpoint, obj, parseJson, splitCheckpoint, str, type Json, type PartitionState } from './checkpoint-codec.js';

export interface KafkaStoreOptions extends KafkaConnectionOptions {
  /** The compacted state topic; created if missing. */
  topic: string;
  /** Partitions of the state topic when this store creates it (default 1). */
  numPartitions?: number;
  replicationFactor?: number;
  /** Upper bound on one load (default 60000 ms). */
  loadTimeoutMs?: number;
  /** Bytes of records per produce request (default 512 KiB; the broker's default message.max.bytes is 1 MiB). */
  maxRequestBytes?: number;
  logger?: KafkaLogger;
}

type Slot = 0 | 1;

interface StreamRecord {
  seq: number;
  writer: string;
  state: string | null; // null: deletion marker
}

/** What this process knows about one source partition's records in the topic. */
interface Known {
  seq: number; // committed seq (0: nothing committed)
  writer: string;
  maxSeq: number; // highest seq seen or used, committed or not
  /** Committed streams: which slot holds them and a hash of their state. */
  streams: Map<string, { slot: Slot; hash: string }>;
  /** Keys that hold records of no committed save: tombstoned by the next save unless overwritten. */
  dirty: Set<string>;
  /** Keys of committed deletions, in the order they must be tombstoned. */
  gc: string[];
}

export class KafkaCheckpointStore implements CheckpointStore {
  readonly name: string;
  private readonly kafka: Kafka;
  private readonly admin: Admin;
  private readonly producer: Producer;
  private readonly log: KafkaLogger;
  private readonly writer = randomBytes(6).toString('hex');
  private readonly known = new Map<string, Known>();
  private ready: Promise<number> | null = null; // resolves to the state topic's partition count

  constructor(private readonly opts: KafkaStoreOptions) {
    if (!/^[A-Za-z0-9._-]{1,249}$/.test(opts.topic)) throw new Error(`state topic "${opts.topic}" is not a valid Kafka topic name`);
    this.name = `kafka:${opts.topic}`;
    this.log = opts.logger ?? silentKafkaLogger;
    this.kafka = createKafka(opts);
    this.admin = this.kafka.admin();
    this.producer = this.kafka.producer({ idempotent: true, maxInFlightRequests: 1, allowAutoTopicCreation: false });
  }

  async load(partitions?: string[]): Promise<Checkpoint> {
    const n = await this.connect();
    const { positions, records } = await this.readAll(n);
    const want = partitions ?? [...new Set([...positions.keys(), ...[...records.keys()].map((k) => parseStreamKey(k)?.partition ?? '')])].filter((p) => p !== '');
    const parts: PartitionState[] = [];
    for (const p of want) {
      const { known, state } = this.resolve(p, positions.get(p), records);
      this.known.set(p, known);
      if (state) parts.push(state);
    }
    return joinCheckpoint(parts);
  }

  async save(checkpoint: Checkpoint): Promise<void> {
    const parts = splitCheckpoint(checkpoint);
    const n = await this.connect();
    const unknown = [...parts.keys()].filter((p) => !this.known.has(p));
    if (unknown.length > 0) await this.load(unknown);

    const phase1: Message[] = [];
    const phase2: Message[] = [];
    type Change = { p: string; k: Known; seq: number; wrote: Map<string, { slot: Slot; hash: string } | null>; keys: string[] };
    const changes: Change[] = [];
    for (const part of parts.values()) {
      const k = this.known.get(part.partition)!;
      const seq = Math.max(k.seq, k.maxSeq) + 1;
      k.maxSeq = seq;
      const at = stateRecordPartition(part.partition, n);
      const c: Change = { p: part.partition, k, seq, wrote: new Map(), keys: [] };
      const put = (key: string, value: string | null) => {
        phase1.push({ key, value, partition: at });
        c.keys.push(key);
      };
      for (const key of k.gc) put(key, null);
      for (const [stream, state] of part.streams) {
        const hash = createHash('sha1').update(state).digest('base64');
        const cur = k.streams.get(stream);
        if (cur && cur.hash === hash) continue;
        const slot: Slot = cur ? (cur.slot === 0 ? 1 : 0) : 0;
        put(streamKey(slot, part.partition, stream), JSON.stringify({ v: 1, partition: part.partition, stream, seq, writer: this.writer, state }));
        c.wrote.set(stream, { slot, hash });
      }
      for (const [stream, cur] of k.streams) {
        if (part.streams.has(stream)) continue;
        const slot: Slot = cur.slot === 0 ? 1 : 0;
        put(streamKey(slot, part.partition, stream), JSON.stringify({ v: 1, partition: part.partition, stream, seq, writer: this.writer, deleted: true }));
        c.wrote.set(stream, null);
      }
      const written = new Set(c.keys);
      for (const key of k.dirty) if (!written.has(key)) put(key, null);
      phase2.push({
        key: positionsKey(part.partition),
        value: JSON.stringify({ v: 1, partition: part.partition, seq, writer: this.writer, position: part.position, counters: part.counters }),
        partition: at,
      });
      changes.push(c);
    }

    try {
      await this.send(phase1); // stream records, deletion markers, cleanup tombstones
      await this.send(phase2); // commit points, after everything above is acknowledged
    } catch (e) {
      // Some records may have landed: none is committed, so they are dirty until a later save covers them.
      for (const c of changes) for (const key of c.keys) c.k.dirty.add(key);
      throw new Error(`checkpoint save to Kafka topic ${this.opts.topic} failed: ${e instanceof Error ? e.message : String(e)}`, { cause: e });
    }

    for (const c of changes) {
      const k = c.k;
      k.seq = c.seq;
      k.writer = this.writer;
      k.dirty.clear();
      k.gc = [];
      for (const [stream, w] of c.wrote) {
        const cur = k.streams.get(stream);
        if (w) k.streams.set(stream, w);
        else if (cur) {
          // Committed deletion: drop the data slot first, then the marker (see the header comment).
          k.gc.push(streamKey(cur.slot, c.p, stream), streamKey(cur.slot === 0 ? 1 : 0, c.p, stream));
          k.streams.delete(stream);
        }
      }
    }
    const gc = changes.flatMap((c) => c.k.gc.map((key) => ({ key, value: null, partition: stateRecordPartition(c.p, n) })));
    if (gc.length > 0) {
      try {
        await this.send(gc);
        for (const c of changes) c.k.gc = [];
      } catch (e) {
        this.log.warn({ err: e instanceof Error ? e.message : String(e) }, 'checkpoint tombstones not written; the next save retries');
      }
    }
  }

  async close(): Promise<void> {
    if (!this.ready) return;
    await this.ready.catch(() => {});
    await this.producer.disconnect();
    await this.admin.disconnect();
  }

  // --------------------------------------------------------------------------------------------- internals

  private connect(): Promise<number> {
    this.ready ??= (async () => {
      this.log.info({ kafka: describeKafka(this.opts), topic: this.opts.topic }, 'kafka checkpoint store connecting');
      await this.admin.connect();
      const topics = await this.admin.listTopics();
      if (!topics.includes(this.opts.topic)) {
        await this.admin.createTopics({
          waitForLeaders: true,
          topics: [
            {
              topic: this.opts.topic,
              numPartitions: this.opts.numPartitions ?? 1,
              replicationFactor: this.opts.replicationFactor ?? -1,
              configEntries: [{ name: 'cleanup.policy', value: 'compact' }],
            },
          ],
        });
      }
      await this.producer.connect();
      const meta = await this.admin.fetchTopicMetadata({ topics: [this.opts.topic] });
      return meta.topics[0]?.partitions.length ?? 1;
    })();
    this.ready.catch(() => (this.ready = null));
    return this.ready;
  }

  private async send(messages: Message[]): Promise<void> {
    const limit = this.opts.maxRequestBytes ?? 512 * 1024;
    let chunk: Message[] = [];
    let bytes = 0;
    const flush = async () => {
      if (chunk.length === 0) return;
      await this.producer.send({ topic: this.opts.topic, messages: chunk, acks: -1 });
      chunk = [];
      bytes = 0;
    };
    for (const m of messages) {
      const size = String(m.key ?? '').length + (m.value === null ? 0 : String(m.value).length) + 64;
      if (bytes + size > limit) await flush();
      chunk.push(m);
      bytes += size;
    }
    await flush();
  }

  /** Reads the topic from the beginning up to the end offsets at call time; latest value per key. */
  private async readAll(n: number): Promise<{ positions: Map<string, PositionsRecord>; records: Map<string, StreamRecord & { partition: string } | null> }> {
    const topic = this.opts.topic;
    const ends = await this.admin.fetchTopicOffsets(topic);
    const pending = new Map<number, number>();
    for (const e of ends) if (Number(e.high) > Number(e.low)) pending.set(e.partition, Number(e.high));
    const positions = new Map<string, PositionsRecord>();
    const records = new Map<string, (StreamRecord & { partition: string }) | null>();
    if (pending.size === 0 || n === 0) return { positions, records };

    const groupId = `modewatch-state-loader-${randomBytes(6).toString('hex')}`;
    const consumer = this.kafka.consumer({ groupId, allowAutoTopicCreation: false, maxWaitTimeInMs: 500 });
    const limit = this.opts.loadTimeoutMs ?? 60_000;
    let failure: Error | null = null;
    try {
      await consumer.connect();
      await consumer.subscribe({ topics: [topic], fromBeginning: true });
      await new Promise<void>((resolve, reject) => {
        const timer = setTimeout(
          () => reject(new Error(`loading checkpoints from ${topic} took over ${limit} ms (${pending.size} partition(s) not read to the end)`)),
          limit,
        );
        void consumer
          .run({
            autoCommit: false,
            eachBatch: async ({ batch }) => {
              const end = pending.get(batch.partition);
              if (end === undefined) return;
              for (const m of batch.messages) {
                const offset = Number(m.offset);
                if (offset >= end) break;
                try {
                  readRecord(m.key?.toString('utf8') ?? '', m.value, positions, records, `${topic}-${batch.partition}@${offset}`);
                } catch (e) {
                  failure = e instanceof Error ? e : new Error(String(e));
                }
              }
              if (Number(batch.lastOffset()) + 1 >= end) pending.delete(batch.partition);
              if (pending.size === 0 || failure) {
                clearTimeout(timer);
                if (failure) reject(failure);
                else resolve();
              }
            },
          })
          .catch(reject);
      });
    } finally {
      await consumer.disconnect().catch(() => {});
      await this.admin.deleteGroups([groupId]).catch(() => {});
    }
    return { positions, records };
  }

  /** The committed state of one partition from what was read, and what this process must remember about it. */
  private resolve(
    p: string,
    pos: PositionsRecord | undefined,
    records: Map<string, (StreamRecord & { partition: string }) | null>,
  ): { known: Known; state: PartitionState | null } {
    const known: Known = { seq: pos?.seq ?? 0, writer: pos?.writer ?? '', maxSeq: pos?.seq ?? 0, streams: new Map(), dirty: new Set(), gc: [] };
    const committed = (r: StreamRecord) => pos !== undefined && (r.seq < pos.seq || (r.seq === pos.seq && r.writer === pos.writer));
    const slots = new Map<string, [(StreamRecord | null)?, (StreamRecord | null)?]>();
    for (const [key, rec] of records) {
      const k = parseStreamKey(key);
      if (!k || k.partition !== p) continue;
      const pair = slots.get(k.stream) ?? [];
      pair[k.slot] = rec;
      slots.set(k.stream, pair);
      if (rec) known.maxSeq = Math.max(known.maxSeq, rec.seq);
    }
    const state: PartitionState | null = pos ? { partition: p, position: pos.position, counters: pos.counters, streams: new Map() } : null;
    for (const [stream, pair] of slots) {
      let best: Slot | null = null;
      for (const slot of [0, 1] as const) {
        const r = pair[slot];
        if (!r) continue;
        if (!committed(r)) known.dirty.add(streamKey(slot, p, stream));
        else if (best === null || r.seq > pair[best]!.seq) best = slot;
      }
      if (best === null) continue;
      const r = pair[best]!;
      const other: Slot = best === 0 ? 1 : 0;
      if (r.state === null) {
        // A committed deletion whose tombstones were not (all) written: finish it, data slot first.
        known.dirty.delete(streamKey(other, p, stream));
        if (pair[other]) known.gc.push(streamKey(other, p, stream));
        known.gc.push(streamKey(best, p, stream));
        continue;
      }
      known.streams.set(stream, { slot: best, hash: createHash('sha1').update(r.state).digest('base64') });
      state?.streams.set(stream, r.state);
    }
    return { known, state };
  }
}

interface PositionsRecord {
  seq: number;
  writer: string;
  position: number;
  counters: Record<string, number>;
}

function readRecord(
  key: string,
  value: Buffer | null,
  positions: Map<string, PositionsRecord>,
  records: Map<string, (StreamRecord & { partition: string }) | null>,
  where: string,
): void {
  if (key.startsWith('p/')) {
    const p = key.slice(2);
    if (value === null) {
      positions.delete(p);
      return;
    }
    const o = obj(parseJson(value.toString('utf8'), where), where);
    positions.set(p, {
      seq: int(o.seq, `${where} .seq`),
      writer: str(o.writer, `${where} .writer`),
      position: int(o.position, `${where} .position`),
      counters: counters(o.counters, `${where} .counters`),
    });
    return;
  }
  const k = parseStreamKey(key);
  if (!k) return; // not ours: a state topic may be shared with tools that write other keys
  if (value === null) {
    records.set(key, null);
    return;
  }
  const o = obj(parseJson(value.toString('utf8'), where), where);
  const deleted = o.deleted === true;
  records.set(key, {
    partition: k.partition,
    seq: int(o.seq, `${where} .seq`),
    writer: str(o.writer, `${where} .writer`),
    state: deleted ? null : str(o.state as Json, `${where} .state`),
  });
}

export function positionsKey(partition: string): string {
  return `p/${partition}`;
}

export function streamKey(slot: Slot, partition: string, stream: string): string {
  return `s${slot}/${partition}/${stream}`;
}

function parseStreamKey(key: string): { slot: Slot; partition: string; stream: string } | null {
  const m = /^s([01])\/([^/]+)\/([\s\S]*)$/.exec(key);
  if (!m) return null;
  return { slot: m[1] === '1' ? 1 : 0, partition: m[2]!, stream: m[3]! };
}

/** Every record of one source partition goes to one state-topic partition (FNV-1a of the name), keeping their order. */
function stateRecordPartition(partition: string, n: number): number {
  let h = 0x811c9dc5;
  for (let i = 0; i < partition.length; i++) {
    h ^= partition.charCodeAt(i);
    h = Math.imul(h, 0x01000193) >>> 0;
  }
  return h % Math.max(1, n);
}
