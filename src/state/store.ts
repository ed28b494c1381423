/**
 * Checkpoint stores: every stream's monitor state plus the source positions it covers.
 * Two implementations: a local directory (atomic rename) and a compacted Kafka topic keyed by stream.
 */

export interface StreamSnapshot {
  stream: string;
  /** Source partition this stream lives on (its key's partition). */
  partition: string;
  /** Serialized monitor state (versioned JSON from the monitor's own serializer). */
  state: string;
}

export interface Checkpoint {
  /** Next offset to read per partition, covered by the snapshots. */
  positions: Record<string, number>;
  streams: StreamSnapshot[];
  /** Counters that must survive restarts (events, rejections by reason), per partition. */
  counters: Record<string, Record<string, number>>;
}

export interface CheckpointStore {
  readonly name: string;
  /** Load what is stored for these partitions (all if omitted). */
  load(partitions?: string[]): Promise<Checkpoint>;
  /** Persist atomically: either all of it is visible on the next load, or none. */
  save(checkpoint: Checkpoint): Promise<void>;
  close(): Promise<void>;
}
