/**
 * Messages between the Kafka consumer thread (kafka-thread-worker.ts) and the daemon's thread
 * (kafka-thread-source.ts), and how a batch of records travels between them: packed into a few typed arrays
 * whose buffers are transferred, not copied record by record.
 */
import { isAscii } from 'node:buffer';
import type { KafkaLogger } from './kafka-client.js';
import type { KafkaSourceOptions } from './kafka-source.js';
import type { KeyTable } from './key-table.js';
import type { RawRecord, RecordBatch } from './source.js';

/** Options as they cross to the worker: patterns as source and flags, no logger (logs come back as messages). */
export type WireOptions = Omit<KafkaSourceOptions, 'topics' | 'logger'> & { topics: string[]; patterns: { source: string; flags: string }[] | null };

export interface PackedBatch {
  partition: string;
  topic: string;
  n: number;
  offsets: Float64Array;
  timestamps: Float64Array;
  /** Key i is bytes[keyStart[i], keyEnd[i]) and value i is bytes[valueStart[i], valueEnd[i]); a start of -1 is
   *  null. The consumer thread only copies bytes: decoding them to text and keys to stream names happens on the
   *  daemon's thread, which has the time (kafkajs itself keeps the consumer thread busy). */
  bytes: Uint8Array;
  keyStart: Int32Array;
  keyEnd: Int32Array;
  valueStart: Int32Array;
  valueEnd: Int32Array;
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

/** Keys and values of the batch being packed (reused between batches: packing allocates per batch, not per record). */
const keysHeld: (Buffer | null)[] = [];
const valuesHeld: (Buffer | null)[] = [];

function asBytes(v: Buffer | string | null): Buffer | null {
  return v === null ? null : typeof v === 'string' ? Buffer.from(v, 'utf8') : v;
}

export function packBatch(batch: RecordBatch): { batch: PackedBatch; transfer: ArrayBuffer[] } {
  const n = batch.length;
  const offsets = new Float64Array(n);
  const timestamps = new Float64Array(n);
  const headers: PackedBatch['headers'] = [];
  let topic = '';
  let total = 0;
  if (keysHeld.length < n) {
    keysHeld.length = n;
    valuesHeld.length = n;
  }
  for (let i = 0; i < n; i++) {
    const r = batch.record(i);
    topic = r.topic;
    offsets[i] = r.offset;
    timestamps[i] = r.timestamp;
    const k = asBytes(r.key);
    const v = asBytes(r.value);
    keysHeld[i] = k;
    valuesHeld[i] = v;
    if (k !== null) total += k.length;
    if (v !== null) total += v.length;
    for (const _ in r.headers) {
      headers.push([i, { ...r.headers } as Record<string, Uint8Array | string | undefined>]);
      break;
    }
  }
  // Copying each key and value is cheaper than finding out whether they share one buffer (typed-array getters
  // such as byteOffset and buffer cost more than a small copy).
  const bytes = new Uint8Array(total);
  const keyStart = new Int32Array(n);
  const keyEnd = new Int32Array(n);
  const valueStart = new Int32Array(n);
  const valueEnd = new Int32Array(n);
  let at = 0;
  for (let i = 0; i < n; i++) {
    at = place(keysHeld[i], bytes, at, keyStart, keyEnd, i);
    at = place(valuesHeld[i], bytes, at, valueStart, valueEnd, i);
  }
  keysHeld.fill(null); // keep no fetched buffer alive past the batch
  valuesHeld.fill(null);
  return {
    batch: { partition: batch.partition, topic, n, offsets, timestamps, bytes, keyStart, keyEnd, valueStart, valueEnd, headers },
    transfer: [bytes.buffer, keyStart.buffer, keyEnd.buffer, valueStart.buffer, valueEnd.buffer, offsets.buffer, timestamps.buffer] as ArrayBuffer[],
  };
}

/** Copies b (if any) to bytes at `at` and records where it went in start[i]/end[i] (-1 for none); returns the next free place. */
function place(b: Buffer | null, bytes: Uint8Array, at: number, start: Int32Array, end: Int32Array, i: number): number {
  if (b === null) {
    start[i] = -1;
    end[i] = -1;
    return at;
  }
  bytes.set(b, at);
  start[i] = at;
  end[i] = at + b.length;
  return at + b.length;
}

const NO_HEADERS: Readonly<Record<string, Buffer | string | undefined>> = Object.freeze({});

/**
 * A packed batch read through the RecordBatch cursor on the daemon's thread: one reused record, no copies. A
 * value is offered as its bytes in the packed array (RawRecord.valueBytes), which the JSON decoder reads; its text
 * (`value`) is made only when asked for.
 */
export class PackedRecordBatch implements RecordBatch {
  readonly partition: string;
  readonly length: number;
  private readonly rec: RawRecord;
  private readonly buf: Buffer;
  /** The bytes as Latin-1 text, one character a byte, made at the first `value` asked for: a value whose bytes
   *  are all ASCII is a slice of it (the same text UTF-8 decoding gives), one decoding call per batch. */
  private text: string | null = null;
  /** True when every byte of the batch is ASCII (the usual case): then no value needs checking on its own. */
  private allAscii = false;
  /** Index into b.headers of the next record with headers (records are read in order; rewinds if not). */
  private h = 0;

  constructor(
    private readonly b: PackedBatch,
    private readonly keys: KeyTable,
  ) {
    this.partition = b.partition;
    this.length = b.n;
    this.buf = Buffer.from(b.bytes.buffer, b.bytes.byteOffset, b.bytes.byteLength);
    const batch = this;
    this.rec = {
      partition: b.partition,
      offset: 0,
      key: null,
      // An own, enumerable getter: a spread copy of the record ({ ...r }) takes the value's text with it.
      get value() {
        return batch.valueText();
      },
      valueBytes: null,
      valueStart: 0,
      valueEnd: 0,
      timestamp: 0,
      headers: NO_HEADERS as RawRecord['headers'],
      topic: b.topic,
    };
  }

  /** The current record's value as text (or bytes, when they are not UTF-8 text), from where record() put it. */
  private valueText(): Buffer | string | null {
    const r = this.rec;
    if (r.valueBytes === null) return null;
    const vs = r.valueStart as number;
    const ve = r.valueEnd as number;
    if (this.text === null) {
      this.text = this.buf.toString('latin1');
      this.allAscii = isAscii(this.buf);
    }
    if (this.allAscii) return this.text.slice(vs, ve);
    const bytes = this.b.bytes;
    let j = vs;
    while (j < ve && bytes[j] < 0x80) j++;
    return j === ve ? this.text.slice(vs, ve) : this.buf.subarray(vs, ve);
  }

  record(i: number): RawRecord {
    const b = this.b;
    const r = this.rec;
    r.offset = b.offsets[i];
    r.timestamp = b.timestamps[i];
    const ks = b.keyStart[i];
    r.key = ks < 0 ? null : this.keys.key(b.bytes, ks, b.keyEnd[i]);
    const vs = b.valueStart[i];
    r.valueBytes = vs < 0 ? null : b.bytes;
    r.valueStart = vs;
    r.valueEnd = b.valueEnd[i];
    r.headers = NO_HEADERS as RawRecord['headers'];
    const hs = b.headers;
    if (hs.length > 0) {
      if (this.h >= hs.length || hs[this.h][0] > i) this.h = 0;
      while (this.h < hs.length && hs[this.h][0] < i) this.h++;
      if (this.h < hs.length && hs[this.h][0] === i) {
        const headers: RawRecord['headers'] = {};
        for (const [name, v] of Object.entries(hs[this.h][1])) headers[name] = v instanceof Uint8Array ? Buffer.from(v) : v;
        r.headers = headers;
      }
    }
    return r;
  }
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
