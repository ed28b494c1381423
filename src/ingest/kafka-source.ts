/**
 * Kafka as a modewatch Source, on kafkajs 2.2.4: one consumer in a consumer group, batches per partition,
 * offsets committed only through Source.commit (that is, only once a checkpoint covers them).
 *
 * Assignment. kafkajs 2.2.4 speaks the eager rebalance protocol and has no revoke/assign callbacks; the
 * GROUP_JOIN event carries the new assignment after every (re)join. The source compares it with the
 * partitions it owned: those gone go to onRevoked, new ones to onAssigned, whose returned offsets are applied
 * with consumer.seek before any record of that partition is handed out. Partitions kept across a rebalance
 * get a seek to the next offset this process was at (kafkajs would otherwise go back to the committed offset,
 * which trails what the in-memory models already saw). A partition onAssigned gives no offset for resumes
 * from the committed group offset, or, without one, from the earliest (fromBeginning, the default) or latest.
 *
 * Known limit of kafkajs: the GROUP_JOIN event is not awaited and comes after the rejoin, so onRevoked runs
 * when the partition may already be owned by another member. The checkpoint the new owner restores is then
 * the last one made before the rebalance, and events after it are processed again (at least once).
 *
 * Lag per partition is high watermark minus the next offset to read. High watermarks come for free with each
 * fetched batch and are refreshed with admin.fetchTopicOffsets at most every lagRefreshMs when lag() is read.
 */
import type { Admin, Consumer, EachBatchPayload, Kafka } from 'kafkajs';
import { firstAtOrAfter, KafkaMessageBatch } from './kafka-message-batch.js';
import type { Source, SourceHandlers } from './source.js';
import {
  createKafka,
  describeKafka,
  parsePartitionName,
  partitionName,
  silentKafkaLogger,
  type KafkaConnectionOptions,
  type KafkaLogger,
} from './kafka-client.js';
import { recordDecoderOwner } from './kafkajs.js';

export interface KafkaSourceOptions extends KafkaConnectionOptions {
  groupId: string;
  /** Topic names, or patterns matched against the topics that exist when the source starts. */
  topics: string[] | RegExp[];
  /** Where a partition with no committed offset starts: earliest (true, default) or latest. */
  fromBeginning?: boolean;
  /** Consumer group session timeout (kafkajs default 30000). */
  sessionTimeoutMs?: number;
  /** Heartbeat interval (kafkajs default 3000); must be well below sessionTimeoutMs. */
  heartbeatIntervalMs?: number;
  /** How long the group waits for members to rejoin on a rebalance (kafkajs default 60000). */
  rebalanceTimeoutMs?: number;
  /** Upper bound on the bytes fetched per partition per request (kafkajs default 1 MiB). */
  maxBytesPerPartition?: number;
  /** Longest a fetch waits for new records (default 1000 ms; also bounds how long stop() waits for a fetch). */
  maxWaitTimeMs?: number;
  /** How many partitions' batches are processed at once (default 1). */
  partitionsConsumedConcurrently?: number;
  /** Named topics that do not exist are created with these settings; false: fail instead. Default: broker defaults. */
  createTopics?: { numPartitions?: number; replicationFactor?: number } | false;
  /** start() rejects if the group is not joined within this time (default 60000 ms). */
  joinTimeoutMs?: number;
  /** Lag refresh period in ms (default 5000). */
  lagRefreshMs?: number;
  logger?: KafkaLogger;
}

interface TopicPartition {
  topic: string;
  partition: number;
}

export class KafkaSource implements Source {
  readonly name: string;
  private readonly kafka: Kafka;
  private readonly consumer: Consumer;
  private readonly admin: Admin;
  private readonly log: KafkaLogger;
  private handlers: SourceHandlers | null = null;

  /** Partitions this member owns, by modewatch name. */
  private readonly owned = new Map<string, TopicPartition>();
  /** Next offset to read (after the last record handed out, or where a seek put us). */
  private readonly next = new Map<string, number>();
  /** Partitions with a seek in flight: records below the target are dropped if a stale fetch still delivers them. */
  private readonly floor = new Map<string, number>();
  private readonly highWatermarks = new Map<string, number>();
  /** Serialises assignment changes; batches wait for it so that no record is handed out before its seek. */
  private assignment: Promise<void> = Promise.resolve();
  private inflight = new Set<Promise<void>>();
  private joined = false;
  private fatal = false;
  private stopping = false;
  private started = false;
  private lagRefreshedAt = 0;
  private lagRefreshing = false;
  private readonly removeListeners: (() => void)[] = [];
  private firstJoin: { resolve: () => void; reject: (e: Error) => void } | null = null;

  constructor(private readonly opts: KafkaSourceOptions) {
    validate(opts);
    this.log = opts.logger ?? silentKafkaLogger;
    this.name = `kafka:${opts.topics.map(String).join(',')}`;
    this.kafka = createKafka(opts);
    this.admin = this.kafka.admin();
    this.consumer = this.kafka.consumer({
      groupId: opts.groupId,
      sessionTimeout: opts.sessionTimeoutMs,
      heartbeatInterval: opts.heartbeatIntervalMs,
      rebalanceTimeout: opts.rebalanceTimeoutMs,
      maxBytesPerPartition: opts.maxBytesPerPartition,
      maxWaitTimeInMs: opts.maxWaitTimeMs ?? 1000,
      // Topics are created explicitly (below) with the admin client; never as a side effect of a fetch.
      allowAutoTopicCreation: false,
    });
  }

  async start(handlers: SourceHandlers): Promise<void> {
    if (this.started) throw new Error('KafkaSource.start called twice');
    this.started = true;
    this.handlers = handlers;
    // recordDecoder: 'modewatch' when kafkajs decodes records with ours (kafkajs.ts), 'kafkajs' when with its own.
    this.log.info({ kafka: describeKafka(this.opts), groupId: this.opts.groupId, recordDecoder: recordDecoderOwner }, 'kafka source starting');
    await this.admin.connect();
    await this.ensureTopics();

    const ev = this.consumer.events;
    this.removeListeners.push(
      this.consumer.on(ev.GROUP_JOIN, (e) => {
        const assigned: TopicPartition[] = [];
        for (const [topic, partitions] of Object.entries(e.payload.memberAssignment)) {
          for (const partition of partitions) assigned.push({ topic, partition });
        }
        this.queueAssignment(assigned);
      }),
      this.consumer.on(ev.CRASH, (e) => {
        this.joined = false;
        const { error, restart } = e.payload;
        if (restart) {
          this.log.warn({ err: error.message }, 'kafka consumer crashed; kafkajs restarts it');
          return;
        }
        this.fatal = true;
        const fatal = new Error(`Kafka consumer stopped and will not restart: ${error.message}`, { cause: error });
        this.firstJoin?.reject(fatal);
        this.handlers?.onFatal(fatal);
      }),
    );

    // run() resolves after the first join attempt, which may have failed and be retried (e.g. a fresh broker
    // whose group coordinator is not up yet): wait for the first applied assignment instead, bounded.
    const limit = this.opts.joinTimeoutMs ?? 60_000;
    let timer: NodeJS.Timeout | undefined;
    const joined = new Promise<void>((resolve, reject) => {
      this.firstJoin = { resolve, reject };
      timer = setTimeout(() => reject(new Error(`Kafka source: group ${this.opts.groupId} not joined within ${limit} ms`)), limit);
    });
    try {
      await this.consumer.connect();
      await this.consumer.subscribe({ topics: this.opts.topics, fromBeginning: this.opts.fromBeginning ?? true });
      await this.consumer.run({
        autoCommit: false,
        eachBatchAutoResolve: false,
        partitionsConsumedConcurrently: this.opts.partitionsConsumedConcurrently ?? 1,
        eachBatch: (payload) => this.track(this.onBatch(payload)),
      });
      await joined;
    } catch (e) {
      this.stopping = true;
      await this.consumer.disconnect().catch(() => {});
      await this.admin.disconnect().catch(() => {});
      throw e;
    } finally {
      clearTimeout(timer);
      this.firstJoin = null;
    }
  }

  async commit(positions: Map<string, number>): Promise<void> {
    const topics = new Map<string, { partition: number; offset: string }[]>();
    for (const [name, offset] of positions) {
      const tp = this.owned.get(name);
      if (!tp) continue; // no longer ours: the new owner commits from its own checkpoints
      if (!Number.isSafeInteger(offset) || offset < 0) throw new Error(`commit: offset ${offset} for ${name} is not a valid Kafka offset`);
      const list = topics.get(tp.topic) ?? [];
      list.push({ partition: tp.partition, offset: String(offset) });
      topics.set(tp.topic, list);
    }
    const flat = [...topics].flatMap(([topic, parts]) => parts.map((p) => ({ topic, ...p })));
    if (flat.length === 0) return;
    await this.consumer.commitOffsets(flat);
  }

  /**
   * Stops fetching, lets the batch in hand finish, hands the owned partitions to onRevoked (so the last
   * checkpoint and commit happen while still a group member), then leaves the group and disconnects.
   */
  async stop(): Promise<void> {
    if (this.stopping) return;
    this.stopping = true;
    const topics = new Set([...this.owned.values()].map((tp) => tp.topic));
    if (topics.size > 0) this.consumer.pause([...topics].map((topic) => ({ topic })));
    await Promise.allSettled([...this.inflight]);
    await this.assignment.catch(() => {});
    const names = [...this.owned.keys()];
    if (names.length > 0 && this.handlers && !this.fatal) {
      try {
        await this.handlers.onRevoked(names);
      } catch (e) {
        this.log.error({ err: errMessage(e) }, 'onRevoked failed while stopping');
      }
    }
    this.owned.clear();
    this.joined = false;
    for (const remove of this.removeListeners.splice(0)) remove();
    await this.consumer.disconnect();
    await this.admin.disconnect();
  }

  lag(): Map<string, number> {
    if (!this.stopping && Date.now() - this.lagRefreshedAt >= (this.opts.lagRefreshMs ?? 5000)) void this.refreshLag();
    const out = new Map<string, number>();
    for (const name of this.owned.keys()) {
      const hw = this.highWatermarks.get(name);
      const next = this.next.get(name);
      if (hw !== undefined && next !== undefined) out.set(name, Math.max(0, hw - next));
    }
    return out;
  }

  ready(): boolean {
    return this.joined && !this.fatal && !this.stopping;
  }

  // ------------------------------------------------------------------------------------------------- internals

  private async ensureTopics(): Promise<void> {
    const named = this.opts.topics.filter((t): t is string => typeof t === 'string');
    if (named.length === 0) return;
    const existing = new Set(await this.admin.listTopics());
    const missing = named.filter((t) => !existing.has(t));
    if (missing.length === 0) return;
    const create = this.opts.createTopics;
    if (create === false) throw new Error(`Kafka topics do not exist: ${missing.join(', ')} (creating them is turned off)`);
    this.log.info({ topics: missing }, 'creating missing Kafka topics');
    await this.admin.createTopics({
      waitForLeaders: true,
      topics: missing.map((topic) => ({
        topic,
        numPartitions: create?.numPartitions ?? -1,
        replicationFactor: create?.replicationFactor ?? -1,
      })),
    });
  }

  private queueAssignment(assigned: TopicPartition[]): void {
    this.assignment = this.assignment
      .then(() => this.applyAssignment(assigned))
      .catch((e: unknown) => {
        this.fatal = true;
        const fatal = new Error(`partition assignment failed: ${errMessage(e)}`, { cause: e });
        this.firstJoin?.reject(fatal);
        this.handlers?.onFatal(fatal);
      });
  }

  private async applyAssignment(assigned: TopicPartition[]): Promise<void> {
    const handlers = this.handlers;
    if (!handlers || this.stopping) return;
    const now = new Map(assigned.map((tp) => [partitionName(tp.topic, tp.partition), tp]));
    const revoked = [...this.owned.keys()].filter((n) => !now.has(n));
    if (revoked.length > 0) {
      await handlers.onRevoked(revoked);
      for (const n of revoked) {
        this.owned.delete(n);
        this.next.delete(n);
        this.floor.delete(n);
        this.highWatermarks.delete(n);
      }
    }
    const added: string[] = [];
    for (const [n, tp] of now) {
      if (this.owned.has(n)) {
        // Kept across the rebalance: continue where this process was, not at the (older) committed offset.
        const at = this.next.get(n);
        if (at !== undefined) this.seek(n, tp, at);
      } else {
        added.push(n);
      }
    }
    if (added.length > 0) {
      const offsets = await handlers.onAssigned(added);
      for (const n of added) {
        const tp = now.get(n)!;
        this.owned.set(n, tp);
        const at = offsets.get(n);
        if (at !== undefined) {
          if (!Number.isSafeInteger(at) || at < 0) throw new Error(`onAssigned returned offset ${at} for ${n}`);
          this.seek(n, tp, at);
        }
      }
    }
    this.log.info({ assigned: [...now.keys()], revoked, added }, 'kafka partitions assigned');
    this.joined = true;
    this.firstJoin?.resolve();
  }

  private seek(name: string, tp: TopicPartition, offset: number): void {
    this.consumer.seek({ topic: tp.topic, partition: tp.partition, offset: String(offset) });
    this.next.set(name, offset);
    this.floor.set(name, offset);
  }

  private track(p: Promise<void>): Promise<void> {
    this.inflight.add(p);
    return p.finally(() => this.inflight.delete(p));
  }

  private async onBatch({ batch, resolveOffset, heartbeat, isRunning, isStale }: EachBatchPayload): Promise<void> {
    await this.assignment;
    // A seek registered after this batch was fetched makes it stale: kafkajs refetches from the seek offset.
    if (!isRunning() || isStale() || this.stopping || this.fatal) return;
    const name = partitionName(batch.topic, batch.partition);
    const tp = this.owned.get(name);
    if (!tp || !this.handlers) return;
    const hw = Number(batch.highWatermark);
    if (Number.isFinite(hw)) this.highWatermarks.set(name, hw);

    // Messages before the floor are already covered by the restored checkpoint.
    const start = firstAtOrAfter(batch.messages, this.floor.get(name));
    const last = batch.messages[batch.messages.length - 1];
    if (start < batch.messages.length) {
      await this.handlers.onBatch(new KafkaMessageBatch(name, batch.topic, batch.messages, start));
      this.floor.delete(name);
    }
    if (last) {
      // kafkajs moves past trailing control records when the last message's offset is resolved.
      resolveOffset(last.offset);
      this.next.set(name, Math.max(Number(batch.lastOffset()), Number(last.offset)) + 1);
    }
    await heartbeat();
  }

  private async refreshLag(): Promise<void> {
    if (this.lagRefreshing) return;
    this.lagRefreshing = true;
    this.lagRefreshedAt = Date.now();
    try {
      const topics = new Set([...this.owned.values()].map((tp) => tp.topic));
      for (const topic of topics) {
        const offsets = await this.admin.fetchTopicOffsets(topic);
        for (const o of offsets) this.highWatermarks.set(partitionName(topic, o.partition), Number(o.high));
      }
      // Partitions not fetched from yet: their next offset is the committed one, or the start of the log.
      const unknown = [...this.owned].filter(([n]) => !this.next.has(n));
      if (unknown.length > 0) {
        const byTopic = new Set(unknown.map(([, tp]) => tp.topic));
        const committed = await this.admin.fetchOffsets({ groupId: this.opts.groupId, topics: [...byTopic] });
        for (const t of committed) {
          const ends = await this.admin.fetchTopicOffsets(t.topic);
          for (const p of t.partitions) {
            const n = partitionName(t.topic, p.partition);
            if (!this.owned.has(n) || this.next.has(n)) continue;
            const c = Number(p.offset);
            const end = ends.find((e) => e.partition === p.partition);
            if (c >= 0) this.next.set(n, c);
            else if (end) this.next.set(n, Number((this.opts.fromBeginning ?? true) ? end.low : end.high));
          }
        }
      }
    } catch (e) {
      this.log.warn({ err: errMessage(e) }, 'kafka lag refresh failed');
    } finally {
      this.lagRefreshing = false;
    }
  }
}

function validate(opts: KafkaSourceOptions): void {
  if (!opts.groupId) throw new Error('Kafka source: groupId is empty');
  if (opts.topics.length === 0) throw new Error('Kafka source: no topics given');
  const kinds = new Set(opts.topics.map((t) => (typeof t === 'string' ? 'name' : 'pattern')));
  if (kinds.size > 1) throw new Error('Kafka source: give topic names or topic patterns, not both');
  for (const t of opts.topics) {
    if (typeof t === 'string' && !/^[A-Za-z0-9._-]{1,249}$/.test(t)) {
      throw new Error(`Kafka source: "${t}" is not a valid Kafka topic name (letters, digits, '.', '_', '-'; at most 249)`);
    }
  }
}

function errMessage(e: unknown): string {
  return e instanceof Error ? e.message : String(e);
}

export { parsePartitionName, partitionName };
