/**
 * A kafkajs batch seen through the RecordBatch cursor: record(i) fills one reused RawRecord from the i-th
 * message, so handing a fetched batch on allocates nothing per message (kafkajs has already built its own
 * message objects; building a second set was measurable garbage at a million messages a second).
 */
import type { KafkaMessage } from 'kafkajs';
import type { RawRecord, RecordBatch } from './source.js';

/** Shared by every record without headers (most of them): no object per record for nothing. */
const NO_HEADERS: Readonly<Record<string, Buffer | string | undefined>> = Object.freeze({});

export class KafkaMessageBatch implements RecordBatch {
  readonly length: number;
  private readonly rec: RawRecord;
  /** The first offset when the batch's offsets are consecutive (the usual case), else NaN: offsets increase
   *  within a batch, so a span of length-1 between the first and the last means no gaps, and no per-record parse. */
  private readonly base: number;

  /** Messages from `start` on (those before it are already covered by a restored checkpoint). */
  constructor(
    readonly partition: string,
    topic: string,
    private readonly messages: readonly KafkaMessage[],
    private readonly start: number,
  ) {
    this.length = messages.length - start;
    const first = this.length > 0 ? Number(messages[start].offset) : NaN;
    const last = this.length > 0 ? Number(messages[messages.length - 1].offset) : NaN;
    this.base = last - first === this.length - 1 ? first : NaN;
    this.rec = { partition, offset: 0, key: null, value: null, timestamp: 0, headers: NO_HEADERS as RawRecord['headers'], topic };
  }

  record(i: number): RawRecord {
    const m = this.messages[this.start + i];
    const r = this.rec;
    r.offset = this.base === this.base ? this.base + i : Number(m.offset);
    r.key = m.key ?? null;
    r.value = m.value ?? null;
    r.timestamp = Number(m.timestamp);
    r.headers = NO_HEADERS as RawRecord['headers'];
    if (m.headers) {
      for (const k in m.headers) {
        if (r.headers === NO_HEADERS) r.headers = {};
        const v = m.headers[k];
        r.headers[k] = Array.isArray(v) ? v[0] : v;
      }
    }
    return r;
  }
}

/** Index of the first message at or after `floor` (a batch's offsets increase). */
export function firstAtOrAfter(messages: readonly KafkaMessage[], floor: number | undefined): number {
  if (floor === undefined) return 0;
  let i = 0;
  while (i < messages.length && Number(messages[i].offset) < floor) i++;
  return i;
}
