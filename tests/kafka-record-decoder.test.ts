/**
 * Our Kafka record decoder and consumer Batch against kafkajs 2.2.4's own (the reference: the library whose modules
 * they replace), on record batches written by kafkajs's own encoder and on fetched partitions with transactions:
 * the results must be identical, field for field.
 */
import { createRequire } from 'node:module';
import { describe, expect, it } from 'vitest';
import { makeFetchBatch, type KafkajsBatchConstructor, type KafkajsBatchInternals, type KafkajsPartitionData } from '../src/ingest/kafka-fetch-batch.js';
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

/** kafkajs's consumer Batch as published, loaded afresh from its file (this thread may have ours in the cache). */
function stockBatch(): KafkajsBatchConstructor {
  const path = internal('consumer/batch.js');
  const saved = require.cache[path];
  delete require.cache[path];
  const stock = require(path) as KafkajsBatchConstructor;
  if (saved === undefined) delete require.cache[path];
  else require.cache[path] = saved;
  return stock;
}

describe('consumer Batch (against kafkajs 2.2.4 as published)', () => {
  const Stock = stockBatch();
  const Ours = makeFetchBatch(Stock, {
    Long: Long as KafkajsBatchInternals['Long'],
    filterAbortedMessages: require(internal('consumer/filterAbortedMessages.js')) as KafkajsBatchInternals['filterAbortedMessages'],
  });
  type Msg = { offset: string; key: Buffer | null; isControlRecord: boolean; batchContext: { producerId: string; inTransaction: boolean } };
  const msg = (offset: string, producerId = '-1', inTransaction = false, control = false, key: Buffer | null = Buffer.from('k')): Msg => ({
    offset,
    key,
    isControlRecord: control,
    batchContext: { producerId, inTransaction },
  });
  const view = (b: object) => {
    const x = b as Record<string, unknown> & Record<'firstOffset' | 'lastOffset' | 'offsetLag' | 'offsetLagLow' | 'isEmpty', () => unknown>;
    return { fields: { ...x }, keys: Object.keys(x), first: x.firstOffset(), last: x.lastOffset(), lag: x.offsetLag(), lagLow: x.offsetLagLow(), empty: x.isEmpty() };
  };
  const cases: [string, string, KafkajsPartitionData<Msg>][] = [
    ['offsets before the one fetched are dropped', '5', { partition: 0, highWatermark: '20', messages: ['3', '4', '5', '6', '7'].map((o) => msg(o)) }],
    ['all before it', '100', { partition: 1, highWatermark: '120', messages: ['98', '99'].map((o) => msg(o)) }],
    ['an empty fetch', '0', { partition: 2, highWatermark: '0', messages: [] }],
    ['offsets past 2^53', '9007199254740990', { partition: 0, highWatermark: '9007199254741000', messages: ['9007199254740989', '9007199254740990', '9007199254740993', '9007199254740994'].map((o) => msg(o)) }],
    [
      'an aborted transaction and control records',
      '10',
      {
        partition: 0,
        highWatermark: '30',
        abortedTransactions: [{ producerId: '7', firstOffset: '12' }],
        messages: [
          msg('10'),
          msg('11', '7', true),
          msg('12', '7', true),
          msg('13', '8', true),
          msg('14', '7', true),
          msg('15', '7', true, true, Buffer.from([0, 0, 0, 0])),
          msg('16', '7', true),
          msg('17', '-1', false, true),
        ],
      },
    ],
  ];
  for (const [what, fetched, data] of cases) {
    it(`keeps the same messages and answers the same: ${what}`, () => {
      const a = view(new Stock('t', fetched, data));
      const b = view(new Ours('t', fetched, data));
      expect(b).toEqual(a);
      expect(b.keys).toEqual(a.keys);
    });
  }
  it('is an instance of kafkajs\'s Batch, with its methods', () => {
    const b = new Ours('t', '0', { partition: 0, highWatermark: '1', messages: [msg('0')] });
    expect(b).toBeInstanceOf(Stock);
  });
});
