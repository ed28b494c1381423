/**
 * The daemon's event loop: batches from a source are decoded, routed to their streams'
 * monitors, and covered by checkpoints (every stream's monitor plus the source positions) before
 * the source may commit its offsets. On a partition assignment it restores the partition's
 * streams and resumes from the checkpointed positions, so a crash at any point, followed by a
 * restart, gives the same models as an uninterrupted run: the models depend only on the records.
 *
 * Delivery of alert transitions is at least once: transitions raised after the last checkpoint
 * are raised again when the same records are processed after a crash.
 */
import { performance } from 'node:perf_hooks';
import type { HealthState } from '../export/daemon-health.js';
import { EventSlot, type DecodeRejection } from '../ingest/event.js';
import type { RawRecord, RecordBatch, Source, SourceHandlers } from '../ingest/source.js';
import type { Checkpoint, CheckpointStore } from '../state/store.js';
import type { RegistrySnapshot, RejectionReason, StreamRegistry } from '../streams/stream-registry.js';

export type RecordDecoder = (record: RawRecord, out: EventSlot) => DecodeRejection | null;

export interface DaemonLogger {
  info(obj: object, msg: string): void;
  warn(obj: object, msg: string): void;
  error(obj: object, msg: string): void;
}

export interface DaemonOptions {
  source: Source;
  /** The decoder of a topic's records, or null when the topic is not configured (its records are refused). */
  decoderFor: (topic: string) => RecordDecoder | null;
  registry: StreamRegistry;
  store: CheckpointStore;
  /** Where refused records go with their reason, if configured. */
  deadLetter: { publish(record: RawRecord, reason: string): boolean } | null;
  checkpointEveryEvents: number;
  checkpointEverySeconds: number;
  health: HealthState;
  log: DaemonLogger;
  /** The source failed for good: the CLI stops what it can and exits non-zero. */
  onFatal: (error: Error) => void;
}

/** Per-partition counts that travel with checkpoints, so totals survive restarts exactly. */
interface PartitionCounters {
  accepted: number;
  rejected: Map<RejectionReason, number>;
}

export class Daemon {
  private readonly slot = new EventSlot();
  private readonly positions = new Map<string, number>();
  private readonly counters = new Map<string, PartitionCounters>();
  private readonly owned = new Set<string>();
  private readonly decoders = new Map<string, RecordDecoder | null>();
  private eventsSinceCheckpoint = 0;
  private lastCheckpointMs = Date.now();
  private checkpointing: Promise<void> | null = null;
  private stopped = false;

  constructor(private readonly o: DaemonOptions) {
    o.health.checkpointingEnabled = true;
  }

  async start(): Promise<void> {
    const handlers: SourceHandlers = {
      onBatch: (b) => this.onBatch(b),
      onAssigned: (p) => this.onAssigned(p),
      onRevoked: (p) => this.onRevoked(p),
      onFatal: (e) => {
        this.o.health.isReady = false;
        this.o.health.reason = `source failed: ${e.message}`;
        this.o.log.error({ err: e.message }, 'source failed and will not recover');
        this.o.onFatal(e);
      },
    };
    this.o.health.reason = 'joining the consumer group';
    await this.o.source.start(handlers);
  }

  /** Stop fetching, finish the batch in hand; the source revokes its partitions, which checkpoints and commits them. */
  async stop(): Promise<void> {
    if (this.stopped) return;
    this.stopped = true;
    this.o.health.isReady = false;
    this.o.health.reason = 'stopping';
    await this.o.source.stop();
    if (this.owned.size > 0) await this.checkpoint(new Set(this.owned));
  }

  /** Totals over the partitions this process holds: accepted and refused by reason (for tests and the summary). */
  totals(): { accepted: number; rejected: Record<string, number>; positions: Record<string, number> } {
    let accepted = 0;
    const rejected: Record<string, number> = {};
    for (const c of this.counters.values()) {
      accepted += c.accepted;
      for (const [r, n] of c.rejected) rejected[r] = (rejected[r] ?? 0) + n;
    }
    return { accepted, rejected, positions: Object.fromEntries(this.positions) };
  }

  private partCounters(p: string): PartitionCounters {
    let c = this.counters.get(p);
    if (c === undefined) {
      c = { accepted: 0, rejected: new Map() };
      this.counters.set(p, c);
    }
    return c;
  }

  private decoder(topic: string): RecordDecoder | null {
    let d = this.decoders.get(topic);
    if (d === undefined) {
      d = this.o.decoderFor(topic);
      this.decoders.set(topic, d);
    }
    return d;
  }

  private async onBatch(batch: RecordBatch): Promise<void> {
    const t0 = performance.now();
    const p = batch.partition;
    const counters = this.partCounters(p);
    const registry = this.o.registry;
    const slot = this.slot;
    const n = batch.length;
    let next = this.positions.get(p) ?? -1;
    // A batch is one partition, so one topic: one decoder look-up per batch, not per record.
    const decode = n > 0 ? this.decoder(batch.record(0).topic) : null;
    for (let i = 0; i < n; i++) {
      const rec = batch.record(i); // valid until the next record(): publish() copies what it keeps
      if (rec.offset < next) continue; // already covered (a re-delivered fetch after a seek)
      slot.partition = p;
      slot.offset = rec.offset;
      let reason: RejectionReason | null = decode === null ? 'unparseable' : decode(rec, slot);
      if (reason !== null) registry.reject(reason);
      else reason = registry.observe(slot);
      if (reason === null) counters.accepted++;
      else {
        counters.rejected.set(reason, (counters.rejected.get(reason) ?? 0) + 1);
        this.o.deadLetter?.publish(rec, reason);
      }
      next = rec.offset + 1;
    }
    if (next >= 0) this.positions.set(p, next);
    this.eventsSinceCheckpoint += n;
    this.o.health.busySeconds += (performance.now() - t0) / 1000;
    const due =
      this.eventsSinceCheckpoint >= this.o.checkpointEveryEvents ||
      (this.eventsSinceCheckpoint > 0 && Date.now() - this.lastCheckpointMs >= this.o.checkpointEverySeconds * 1000);
    if (due) await this.checkpoint(new Set(this.owned));
  }

  private async onAssigned(partitions: string[]): Promise<Map<string, number>> {
    this.o.health.isReady = false;
    this.o.health.reason = `restoring state of ${partitions.length} partition(s)`;
    const fresh = partitions.filter((p) => !this.owned.has(p));
    const resume = new Map<string, number>();
    for (const p of partitions) if (this.owned.has(p) && this.positions.has(p)) resume.set(p, this.positions.get(p) as number);
    if (fresh.length > 0) {
      const cp = await this.o.store.load(fresh);
      const snapshots: RegistrySnapshot[] = cp.streams.map((s) => JSON.parse(s.state) as RegistrySnapshot);
      this.o.registry.restore(snapshots);
      for (const p of fresh) {
        const pos = cp.positions[p];
        if (pos !== undefined) {
          resume.set(p, pos);
          this.positions.set(p, pos);
        }
        const c = this.partCounters(p);
        const saved = cp.counters[p] ?? {};
        c.accepted = saved.accepted ?? 0;
        c.rejected.clear();
        for (const [k, v] of Object.entries(saved)) if (k.startsWith('rejected:')) c.rejected.set(k.slice(9) as RejectionReason, v);
        this.o.registry.accepted += c.accepted;
        for (const [r, n] of c.rejected) this.o.registry.rejections.set(r, (this.o.registry.rejections.get(r) ?? 0) + n);
        this.owned.add(p);
      }
      this.o.log.info({ partitions: fresh, streams: snapshots.length, positions: Object.fromEntries(resume) }, 'partitions assigned and state restored');
    }
    this.o.health.isReady = true;
    this.o.health.reason = 'ready';
    return resume;
  }

  private async onRevoked(partitions: string[]): Promise<void> {
    const mine = new Set(partitions.filter((p) => this.owned.has(p)));
    if (mine.size === 0) return;
    await this.checkpoint(mine);
    this.o.registry.dropPartitions(mine);
    for (const p of mine) {
      const c = this.counters.get(p);
      if (c !== undefined) {
        this.o.registry.accepted -= c.accepted;
        for (const [r, n] of c.rejected) this.o.registry.rejections.set(r, (this.o.registry.rejections.get(r) ?? 0) - n);
      }
      this.owned.delete(p);
      this.positions.delete(p);
      this.counters.delete(p);
    }
    this.o.log.info({ partitions: [...mine] }, 'partitions revoked after a checkpoint');
  }

  /** Save the partitions' streams and positions, then commit the positions. One at a time. */
  async checkpoint(partitions: Set<string>): Promise<void> {
    while (this.checkpointing !== null) await this.checkpointing;
    const run = this.doCheckpoint(partitions);
    this.checkpointing = run;
    try {
      await run;
    } finally {
      this.checkpointing = null;
    }
  }

  private async doCheckpoint(partitions: Set<string>): Promise<void> {
    const withPositions = new Set([...partitions].filter((p) => this.positions.has(p)));
    if (withPositions.size === 0) return;
    const cp: Checkpoint = { positions: {}, streams: [], counters: {} };
    for (const p of withPositions) {
      cp.positions[p] = this.positions.get(p) as number;
      const c = this.partCounters(p);
      const rec: Record<string, number> = { accepted: c.accepted };
      for (const [r, n] of c.rejected) rec[`rejected:${r}`] = n;
      cp.counters[p] = rec;
    }
    for (const s of this.o.registry.snapshot(withPositions)) cp.streams.push({ stream: s.stream, partition: s.partition, state: JSON.stringify(s) });
    try {
      await this.o.store.save(cp);
    } catch (e) {
      this.o.health.failures++;
      this.o.log.error({ err: (e as Error).message, store: this.o.store.name }, 'checkpoint failed; offsets not committed');
      return;
    }
    await this.o.source.commit(new Map(Object.entries(cp.positions)));
    this.eventsSinceCheckpoint = 0;
    this.lastCheckpointMs = Date.now();
    this.o.health.lastCheckpointMs = this.lastCheckpointMs;
  }
}
