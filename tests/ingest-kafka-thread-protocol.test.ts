import { describe, expect, it } from 'vitest';
import { fromWire, packBatch, toWire, unpackBatch } from '../src/ingest/kafka-thread-protocol.js';
import type { RawRecord } from '../src/ingest/source.js';

describe('records between the consumer thread and the daemon thread', () => {
  it('a packed batch unpacks to the same records: keys, values (bytes kept as they were), nulls, headers', () => {
    const records: RawRecord[] = [
      { partition: 't-0', offset: 10, key: Buffer.from('svc-1'), value: Buffer.from('{"ts":1,"value":2}'), timestamp: 1700000000000, headers: {}, topic: 't' },
      { partition: 't-0', offset: 11, key: null, value: Buffer.from([0xff, 0x00, 0xc3]), timestamp: -1, headers: {}, topic: 't' },
      { partition: 't-0', offset: 12, key: Buffer.alloc(0), value: null, timestamp: 5, headers: { trace: Buffer.from('abc'), note: 'x' }, topic: 't' },
      { partition: 't-0', offset: 2 ** 40, key: Buffer.from('ключ'), value: Buffer.from('41.7'), timestamp: 6, headers: {}, topic: 't' },
    ];
    const { batch, transfer } = packBatch('t-0', records);
    expect(transfer.length).toBeGreaterThan(0);
    const back = unpackBatch(structuredClone(batch));
    expect(back.length).toBe(records.length);
    back.forEach((r, i) => {
      const o = records[i];
      expect([r.partition, r.offset, r.timestamp, r.topic]).toEqual([o.partition, o.offset, o.timestamp, o.topic]);
      expect(r.key === null ? null : Buffer.from(r.key as Buffer).toString('hex')).toBe(o.key === null ? null : (o.key as Buffer).toString('hex'));
      expect(r.value === null ? null : Buffer.from(r.value as Buffer).toString('hex')).toBe(o.value === null ? null : (o.value as Buffer).toString('hex'));
    });
    expect(back[2].headers.note).toBe('x');
    expect(Buffer.from(back[2].headers.trace as Buffer).toString()).toBe('abc');
    expect(Object.keys(back[0].headers)).toEqual([]);
  });

  it('options cross with their topic patterns and without the logger', () => {
    const wire = toWire({ brokers: ['127.0.0.1:9092'], clientId: 'c', groupId: 'g', topics: [/^lat\./i], logger: { debug() {}, info() {}, warn() {}, error() {} } });
    const cloned = structuredClone(wire);
    const back = fromWire(cloned, { debug() {}, info() {}, warn() {}, error() {} });
    expect(back.topics).toEqual([/^lat\./i]);
    expect(back.groupId).toBe('g');
    expect(fromWire(structuredClone(toWire({ brokers: ['b:1'], clientId: 'c', groupId: 'g', topics: ['a', 'b'] })), { debug() {}, info() {}, warn() {}, error() {} }).topics).toEqual(['a', 'b']);
  });
});
