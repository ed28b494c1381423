import { describe, expect, it } from 'vitest';
import { KeyTable } from '../src/ingest/key-table.js';
import { fromWire, packBatch, PackedRecordBatch, toWire } from '../src/ingest/kafka-thread-protocol.js';
import { copyRecords, recordBatch, type RawRecord } from '../src/ingest/source.js';

const hex = (v: Buffer | string | null) => (v === null ? null : (typeof v === 'string' ? Buffer.from(v, 'utf8') : Buffer.from(v)).toString('hex'));

describe('records between the consumer thread and the daemon thread', () => {
  it('a packed batch reads back as the same records: keys, values (bytes kept as they were), nulls, headers', () => {
    const records: RawRecord[] = [
      { partition: 't-0', offset: 10, key: Buffer.from('svc-1'), value: Buffer.from('{"ts":1,"value":2}'), timestamp: 1700000000000, headers: {}, topic: 't' },
      { partition: 't-0', offset: 11, key: null, value: Buffer.from([0xff, 0x00, 0xc3]), timestamp: -1, headers: {}, topic: 't' },
      { partition: 't-0', offset: 12, key: Buffer.alloc(0), value: null, timestamp: 5, headers: { trace: Buffer.from('abc'), note: 'x' }, topic: 't' },
      { partition: 't-0', offset: 2 ** 40, key: Buffer.from('ключ'), value: Buffer.from('41.7'), timestamp: 6, headers: {}, topic: 't' },
      { partition: 't-0', offset: 2 ** 40 + 1, key: Buffer.from([0xc3, 0x28]), value: Buffer.from('7'), timestamp: 7, headers: {}, topic: 't' },
      { partition: 't-0', offset: 2 ** 40 + 2, key: Buffer.from('svc-1'), value: Buffer.from([0xe2, 0x82]), timestamp: 8, headers: { h: 'last' }, topic: 't' },
    ];
    const { batch, transfer } = packBatch(recordBatch('t-0', records));
    expect(transfer.length).toBeGreaterThan(0);
    const cursor = new PackedRecordBatch(structuredClone(batch), new KeyTable());
    expect([cursor.partition, cursor.length]).toEqual(['t-0', records.length]);
    const back = copyRecords(cursor);
    back.forEach((r, i) => {
      const o = records[i];
      expect([r.partition, r.offset, r.timestamp, r.topic]).toEqual([o.partition, o.offset, o.timestamp, o.topic]);
      expect(hex(r.key)).toBe(hex(o.key));
      expect(hex(r.value)).toBe(hex(o.value));
      if (o.value !== null && !Buffer.from(o.value).equals(Buffer.from(Buffer.from(o.value).toString('utf8')))) expect(typeof r.value).not.toBe('string');
    });
    expect(back[5].headers.h).toBe('last');
    // Keys come back as text when they are UTF-8 (a repeated key as the same string), else as bytes.
    expect(back[0].key).toBe('svc-1');
    expect(back[3].key).toBe('ключ');
    expect(Buffer.isBuffer(back[4].key)).toBe(true);
    // Values that are ASCII come back as text; others as their bytes.
    expect(back[0].value).toBe('{"ts":1,"value":2}');
    expect(Buffer.isBuffer(back[3].value)).toBe(false);
    // The cursor reuses one record: read out of order, headers still belong to the record asked for.
    expect(cursor.record(2).headers.note).toBe('x');
    expect(cursor.record(0).headers).toEqual({});
    expect(cursor.record(5).headers.h).toBe('last');
    expect(back[2].headers.note).toBe('x');
    expect(Buffer.from(back[2].headers.trace as Buffer).toString()).toBe('abc');
    expect(Object.keys(back[0].headers)).toEqual([]);
    // Each value is also offered in place, as its bytes in the packed array (what the JSON decoder reads).
    records.forEach((o, i) => {
      const r = cursor.record(i);
      if (o.value === null) expect(r.valueBytes).toBeNull();
      else expect(hex(Buffer.from((r.valueBytes as Uint8Array).subarray(r.valueStart, r.valueEnd)))).toBe(hex(o.value));
    });
  });

  it('the key table tells apart keys whose hashes collide, and keys that differ only past ASCII', () => {
    // Two keys with the same 32-bit FNV-1a hash, found once by a search over 3 million generated keys.
    const fnv = (s: string) => {
      let h = 0x811c9dc5;
      for (const b of Buffer.from(s)) h = Math.imul(h ^ b, 0x01000193);
      return h;
    };
    const [a, b] = ['svc-3o4mm7', 'svc-tnkssj'];
    expect(fnv(a)).toBe(fnv(b));
    const table = new KeyTable();
    const at = (s: string | Buffer) => {
      const bytes = Buffer.isBuffer(s) ? s : Buffer.from(s);
      return table.key(bytes, 0, bytes.length);
    };
    for (let round = 0; round < 3; round++) {
      expect(at(a)).toBe(a);
      expect(at(b)).toBe(b);
      expect(at('ключ-1')).toBe('ключ-1');
      expect(at('ключ-2')).toBe('ключ-2');
      expect(Buffer.from(at(Buffer.from([0xff, 0x01])) as Buffer).toString('hex')).toBe('ff01');
      expect(Buffer.from(at(Buffer.from([0xff, 0x02])) as Buffer).toString('hex')).toBe('ff02');
    }
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
