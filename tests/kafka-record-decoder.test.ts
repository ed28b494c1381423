/**
 * Our Kafka record decoder against kafkajs 2.2.4's own (the reference: the library it replaces a module of), on
 * record batches written by kafkajs's own encoder: the decoded records must be identical, field for field.
 */
import { createRequire } from 'node:module';
import { describe, expect, it } from 'vitest';
import { makeRecordDecoder, type KafkajsRecordInternals } from '../src/ingest/kafka-record-decoder.js';
import { KAFKAJS_CHECKED_VERSION } from '../src/ingest/kafkajs.js';

const require = createRequire(import.meta.url);
type Encoded = { buffer: Buffer };
type Header = Record<string, string | Buffer | null | (string | Buffer | null)[]>;
type RecordSpec = { offsetDelta: number; timestampDelta: number | bigint; key: Buffer | string | null; value: Buffer | string | null; headers?: Header };
type BatchSpec = { firstOffset: unknown; firstTimestamp: unknown; maxTimestamp: unknown; lastOffsetDelta: number; compression?: number; records: Encoded[] };
type BatchDecoder = (d: unknown) => Promise<{ records: unknown[] }>;

const kafkajsDir = require.resolve('kafkajs/package.json').replace(/package\.json$/, '');
const internal = (p: string): string => require.resolve(`${kafkajsDir}src/${p}`);
const Long = require(internal('utils/long.js')) as { fromValue(v: unknown): unknown };
const Decoder = require(internal('protocol/decoder.js')) as new (b: Buffer) => unknown;
const encodeBatch = (require(internal('protocol/recordBatch/v0/index.js')) as { RecordBatch: (spec: BatchSpec) => Promise<Encoded> }).RecordBatch;
const encodeRecord = require(internal('protocol/recordBatch/record/v0/index.js')) as (spec: RecordSpec) => Encoded;
const GZIP = 1;

const internals: KafkajsRecordInternals = {
  Long: Long as KafkajsRecordInternals['Long'],
  HeaderDecoder: require(internal('protocol/recordBatch/header/v0/decoder.js')) as KafkajsRecordInternals['HeaderDecoder'],
  logAppendTime: (require(internal('protocol/timestampTypes.js')) as { LOG_APPEND_TIME: number }).LOG_APPEND_TIME,
};

/** kafkajs's batch decoder loaded twice: with its own record decoder, and with ours in that module's place. */
function batchDecoders(): { stock: BatchDecoder; ours: BatchDecoder } {
  const batchPath = internal('protocol/recordBatch/v0/decoder.js');
  const recordPath = internal('protocol/recordBatch/record/v0/decoder.js');
  const saved = { batch: require.cache[batchPath], record: require.cache[recordPath] };
  delete require.cache[batchPath];
  delete require.cache[recordPath];
  const stock = require(batchPath) as BatchDecoder;
  const stockRecord = require.cache[recordPath];
  delete require.cache[batchPath];
  const mod = { ...(stockRecord as NodeJS.Module), exports: makeRecordDecoder(internals) } as NodeJS.Module;
  require.cache[recordPath] = mod;
  const ours = require(batchPath) as BatchDecoder;
  // Leave the cache as it was.
  for (const [p, m] of [[batchPath, saved.batch], [recordPath, saved.record]] as const) {
    if (m === undefined) delete require.cache[p];
    else require.cache[p] = m;
  }
  return { stock, ours };
}

async function decodeBoth(spec: Omit<BatchSpec, 'records' | 'lastOffsetDelta'>, records: RecordSpec[], flipAttributes = 0) {
  const encoded = await encodeBatch({ ...spec, lastOffsetDelta: records.length - 1, records: records.map(encodeRecord) });
  const buf = Buffer.from(encoded.buffer);
  // Attributes (int16) sit after firstOffset, length, leader epoch, magic and CRC (kafkajs does not check the CRC).
  if (flipAttributes !== 0) buf.writeInt16BE(buf.readInt16BE(21) | flipAttributes, 21);
  const { stock, ours } = batchDecoders();
  const a = await stock(new Decoder(buf));
  const b = await ours(new Decoder(buf));
  return { stock: a, ours: b };
}

function someRecords(n: number, tsStep: number): RecordSpec[] {
  const out: RecordSpec[] = [];
  for (let i = 0; i < n; i++) {
    const headers: Header | undefined =
      i % 7 === 1 ? { trace: `t-${i}` } : i % 7 === 2 ? { dup: ['a', 'b', Buffer.from([0xff, 0x00])] } : i % 7 === 3 ? { empty: '' } : undefined;
    out.push({
      offsetDelta: i,
      timestampDelta: i * tsStep - (i % 5 === 0 ? 3 : 0),
      key: i % 4 === 0 ? null : `svc-${i % 10}`,
      value: i % 9 === 0 ? null : `{"ts":${1767225600000 + i},"value":${i / 8}}`,
      headers,
    });
  }
  return out;
}

describe('Kafka record decoder (against kafkajs 2.2.4, on batches its own encoder wrote)', () => {
  it('is checked against the kafkajs version installed', () => {
    expect((require('kafkajs/package.json') as { version: string }).version).toBe(KAFKAJS_CHECKED_VERSION);
  });

  it('decodes plain records the same: keys, null values, headers (repeated keys, empty values), negative deltas', async () => {
    const { stock, ours } = await decodeBoth({ firstOffset: Long.fromValue(1234), firstTimestamp: 1767225600000, maxTimestamp: 1767225700000 }, someRecords(500, 5));
    expect(ours.records).toHaveLength(500);
    expect(ours).toEqual(stock);
    expect(Object.keys(ours.records[2] as object)).toEqual(Object.keys(stock.records[2] as object));
  });

  it('falls back to 64-bit arithmetic beyond 2^53: offsets, timestamps, and deltas of more than seven bytes', async () => {
    const near = await decodeBoth({ firstOffset: Long.fromValue('9007199254740980'), firstTimestamp: 1767225600000, maxTimestamp: 1767225600000 }, someRecords(40, 1));
    expect(near.ours).toEqual(near.stock);
    expect((near.ours.records[39] as { offset: string }).offset).toBe('9007199254741019');
    const far = await decodeBoth({ firstOffset: Long.fromValue('4611686018427387904'), firstTimestamp: '9007199254740000', maxTimestamp: '9007199254740000' }, someRecords(30, 100));
    expect(far.ours).toEqual(far.stock);
    const bigDelta = someRecords(6, 1).map((r, i) => ({ ...r, timestampDelta: BigInt(i % 2 ? 1 : -1) * (2n ** 50n + BigInt(i)) }));
    const big = await decodeBoth({ firstOffset: Long.fromValue(0), firstTimestamp: 1767225600000, maxTimestamp: 1767225600000 }, bigDelta);
    expect(big.ours).toEqual(big.stock);
  });

  it('keeps "no timestamp" (-1), log-append time and control batches as kafkajs reads them', async () => {
    const none = await decodeBoth({ firstOffset: Long.fromValue(7), firstTimestamp: -1, maxTimestamp: -1 }, someRecords(20, 0));
    expect(none.ours).toEqual(none.stock);
    expect((none.ours.records[1] as { timestamp: string }).timestamp).toBe('-1');
    const logAppend = await decodeBoth({ firstOffset: Long.fromValue(7), firstTimestamp: 1767225600000, maxTimestamp: 1767225699999 }, someRecords(20, 3), 0x08);
    expect(logAppend.ours).toEqual(logAppend.stock);
    expect((logAppend.ours.records[5] as { timestamp: string }).timestamp).toBe('1767225699999');
    const control = await decodeBoth({ firstOffset: Long.fromValue(7), firstTimestamp: 1767225600000, maxTimestamp: 1767225600000 }, someRecords(3, 1), 0x20);
    expect(control.ours).toEqual(control.stock);
  });

  it('decodes gzip-compressed batches the same', async () => {
    const { stock, ours } = await decodeBoth({ firstOffset: Long.fromValue(99), firstTimestamp: 1767225600000, maxTimestamp: 1767225600000, compression: GZIP }, someRecords(300, 2));
    expect(ours.records).toHaveLength(300);
    expect(ours).toEqual(stock);
  });
});
