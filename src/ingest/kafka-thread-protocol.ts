/**
 * Messages between the Kafka consumer thread (kafka-thread-worker.ts) and the daemon's thread
 * (kafka-thread-source.ts), and how a batch of records travels between them: packed into a few typed arrays
 * whose buffers are transferred, not copied record by record.
 */
import { isUtf8 } from 'node:buffer';
import type { KafkaLogger } from './kafka-client.js';
import type { KafkaSourceOptions } from './kafka-source.js';
import type { RawRecord } from './source.js';

/** Options as they cross to the worker: patterns as source and flags, no logger (logs come back as messages). */
export type WireOptions = Omit<KafkaSourceOptions, 'topics' | 'logger'> & { topics: string[]; patterns: { source: string; flags: string }[] | null };

export interface PackedBatch {
  partition: string;
  topic: string;
  n: number;
  offsets: Float64Array;
  timestamps: Float64Array;
  /** Bytes of every key, then every value; a record's key is keyBytes[keyStart[i], keyStart[i+1]), -1 for none. */
  bytes: Uint8Array;
  keyStart: Int32Array;
  keyEnd: Int32Array;
  valueStart: Int32Array;
  valueEnd: Int32Array;
  /** Values that are valid UTF-8, decoded on the consumer thread: value i is text.slice(valueStart[i], valueEnd[i])
   *  when textValue[i] is 1 (decoding there is work the daemon's thread no longer does). */
  text: string;
  textValue: Uint8Array;
  /** Headers of the few records that have any: [index, headers]. */
  headers: [number, Record<string, Uint8Array | string | undefined>][];
}

export type ToWorker =
  | { t: 'reply'; id: number; value: [string, number][] | null }
  | { t: 'ack' }
  | { t: 'commit'; id: number; positions: [string, number][] }
  | { t: 'stop' };

export type FromWorker =
  | { t: 'started' }
  | { t: 'startFailed'; message: string }
  | { t: 'batch'; batch: PackedBatch }
  | { t: 'assigned'; id: number; partitions: string[] }
  | { t: 'revoked'; id: number; partitions: string[] }
  | { t: 'committed'; id: number; error: string | null }
  | { t: 'fatal'; message: string }
  | { t: 'status'; lag: [string, number][]; ready: boolean }
  | { t: 'log'; level: keyof KafkaLogger; obj: object; msg: string }
  | { t: 'stopped' };

export function packBatch(partition: string, records: readonly RawRecord[]): { batch: PackedBatch; transfer: ArrayBuffer[] } {
  const n = records.length;
  let total = 0;
  for (const r of records) total += byteLength(r.key) + byteLength(r.value); // an upper bound: text values take none
  const bytes = new Uint8Array(total);
  const keyStart = new Int32Array(n);
  const keyEnd = new Int32Array(n);
  const valueStart = new Int32Array(n);
  const valueEnd = new Int32Array(n);
  const offsets = new Float64Array(n);
  const timestamps = new Float64Array(n);
  const headers: PackedBatch['headers'] = [];
  const textValue = new Uint8Array(n);
  const parts: string[] = [];
  let textLength = 0;
  let at = 0;
  for (let i = 0; i < n; i++) {
    const r = records[i];
    offsets[i] = r.offset;
    timestamps[i] = r.timestamp;
    at = put(r.key, bytes, at, keyStart, keyEnd, i);
    const v = r.value;
    if (v !== null && (typeof v === 'string' || isUtf8(v))) {
      const t = typeof v === 'string' ? v : v.toString('utf8');
      textValue[i] = 1;
      valueStart[i] = textLength;
      textLength += t.length;
      valueEnd[i] = textLength;
      parts.push(t);
    } else at = put(v, bytes, at, valueStart, valueEnd, i);
    for (const _ in r.headers) {
      headers.push([i, r.headers as Record<string, Uint8Array | string | undefined>]);
      break;
    }
  }
  const topic = n > 0 ? records[0].topic : '';
  return {
    batch: { partition, topic, n, offsets, timestamps, bytes, keyStart, keyEnd, valueStart, valueEnd, text: parts.join(''), textValue, headers },
    transfer: [bytes.buffer, keyStart.buffer, keyEnd.buffer, valueStart.buffer, valueEnd.buffer, offsets.buffer, timestamps.buffer, textValue.buffer] as ArrayBuffer[],
  };
}

const NO_HEADERS: Readonly<Record<string, Buffer | string | undefined>> = Object.freeze({});

export function unpackBatch(b: PackedBatch): RawRecord[] {
  const out: RawRecord[] = new Array(b.n);
  const buf = Buffer.from(b.bytes.buffer, b.bytes.byteOffset, b.bytes.byteLength);
  let h = 0;
  for (let i = 0; i < b.n; i++) {
    let headers = NO_HEADERS as Record<string, Buffer | string | undefined>;
    if (h < b.headers.length && b.headers[h][0] === i) {
      headers = {};
      for (const [k, v] of Object.entries(b.headers[h][1])) headers[k] = v instanceof Uint8Array ? Buffer.from(v) : v;
      h++;
    }
    out[i] = {
      partition: b.partition,
      offset: b.offsets[i],
      key: b.keyStart[i] < 0 ? null : buf.subarray(b.keyStart[i], b.keyEnd[i]),
      value: b.textValue[i] === 1 ? b.text.slice(b.valueStart[i], b.valueEnd[i]) : b.valueStart[i] < 0 ? null : buf.subarray(b.valueStart[i], b.valueEnd[i]),
      timestamp: b.timestamps[i],
      headers,
      topic: b.topic,
    };
  }
  return out;
}

function byteLength(v: Buffer | string | null): number {
  return v === null ? 0 : typeof v === 'string' ? Buffer.byteLength(v) : v.length;
}

function put(v: Buffer | string | null, bytes: Uint8Array, at: number, start: Int32Array, end: Int32Array, i: number): number {
  if (v === null) {
    start[i] = -1;
    end[i] = -1;
    return at;
  }
  const b = typeof v === 'string' ? Buffer.from(v) : v;
  bytes.set(b, at);
  start[i] = at;
  end[i] = at + b.length;
  return at + b.length;
}

export function toWire(o: KafkaSourceOptions): WireOptions {
  const { topics, logger, ...rest } = o;
  void logger;
  const named = topics.every((t) => typeof t === 'string');
  return {
    ...rest,
    topics: named ? (topics as string[]) : [],
    patterns: named ? null : (topics as RegExp[]).map((r) => ({ source: r.source, flags: r.flags })),
  };
}

export function fromWire(w: WireOptions, logger: KafkaLogger): KafkaSourceOptions {
  const { patterns, topics, ...rest } = w;
  return { ...rest, topics: patterns === null ? topics : patterns.map((p) => new RegExp(p.source, p.flags)), logger };
}
