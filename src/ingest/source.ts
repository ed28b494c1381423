/**
 * The source contract: where events come from (Kafka, a file, stdin, the demo).
 * kafkajs is unmaintained; keeping it behind this interface means it can be replaced
 * without touching anything that consumes batches.
 */

/** One raw record as read from a source, before decoding. */
export interface RawRecord {
  /** Source partition name, e.g. "latency-0" for Kafka topic latency partition 0, or "file:0". */
  partition: string;
  /** Position within the partition (Kafka offset, or 0-based line index of a file). */
  offset: number;
  /** Kafka message key: its bytes, or the same key as text when the bytes are valid UTF-8; or null. */
  key: Buffer | string | null;
  /** The payload bytes (or a line of text for files). */
  value: Buffer | string | null;
  /**
   * The same payload's bytes where the source holds them, valueBytes[valueStart, valueEnd), when it has them in
   * one array: a decoder that reads bytes takes them from here without a string or an object per record. Absent
   * or null: read `value`.
   */
  valueBytes?: Uint8Array | null;
  valueStart?: number;
  valueEnd?: number;
  /** Record timestamp, epoch ms (Kafka timestamp; for files, 0 and the decoder reads the ts field). */
  timestamp: number;
  headers: Record<string, Buffer | string | undefined>;
  /** Topic name for Kafka records, else the source's own name. */
  topic: string;
}

/**
 * One partition's records in offset order, read through a cursor. record(i) may fill and return the same object
 * for every i, so that reading a batch allocates nothing per record: whoever keeps a record past the next call
 * copies it (a shallow copy will do: keys, values and headers objects are never reused between records).
 */
export interface RecordBatch {
  readonly partition: string;
  readonly length: number;
  record(i: number): RawRecord;
}

/** Copies of a batch's records, for a caller that keeps them (tests, tools); not for the per-event path. */
export function copyRecords(batch: RecordBatch): RawRecord[] {
  const out: RawRecord[] = [];
  for (let i = 0; i < batch.length; i++) out.push({ ...batch.record(i) });
  return out;
}

/** A batch over records already in an array (files, tests). */
export function recordBatch(partition: string, records: readonly RawRecord[]): RecordBatch {
  return { partition, length: records.length, record: (i) => records[i] };
}

export interface SourceHandlers {
  /** Process one batch; resolve when done. The source does not fetch this partition again until it resolves. */
  onBatch(batch: RecordBatch): Promise<void>;
  /** Partitions were assigned: the handler restores state and returns the offsets to resume from (next offset to read). */
  onAssigned(partitions: string[]): Promise<Map<string, number>>;
  /** Partitions were revoked: the handler checkpoints them before they go. */
  onRevoked(partitions: string[]): Promise<void>;
  /** The source failed and will not recover by itself (e.g. a kafkajs crash without restart). */
  onFatal(error: Error): void;
}

export interface Source {
  readonly name: string;
  start(handlers: SourceHandlers): Promise<void>;
  /** Commit positions (next offset to read) once a checkpoint covers them. */
  commit(positions: Map<string, number>): Promise<void>;
  /** Stop fetching, let the batch in hand finish, disconnect. */
  stop(): Promise<void>;
  /** Consumer lag per partition, if the source knows it. */
  lag(): Map<string, number>;
  /** True once the source has joined (consumer group joined, file opened). */
  ready(): boolean;
}
