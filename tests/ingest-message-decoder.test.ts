import { describe, expect, it } from 'vitest';
import YAML from 'yaml';
import { EventSlot } from '../src/ingest/event.js';
import { makeMessageDecoder, validateMessageDecoding, type MessageDecoding } from '../src/ingest/message-decoder.js';
import type { RawRecord } from '../src/ingest/source.js';

function rec(value: string | Buffer | null, extra: Partial<RawRecord> = {}): RawRecord {
  return {
    partition: 'latency-0',
    offset: 0,
    key: null,
    value: typeof value === 'string' ? Buffer.from(value) : value,
    timestamp: 1_700_000_000_000,
    headers: {},
    topic: 'latency',
    ...extra,
  };
}

function run(cfg: MessageDecoding, r: RawRecord) {
  const s = new EventSlot();
  const reason = makeMessageDecoder(cfg)(r, s);
  return { reason, s };
}

describe('message decoder: value formats', () => {
  it('number: plain text, the record timestamp, the topic as stream', () => {
    const cfg: MessageDecoding = { topic: 'latency', value: { format: 'number' } };
    const x = run(cfg, rec(' 41.5\n'));
    expect(x.reason).toBeNull();
    expect(x.s).toMatchObject({ stream: 'latency', ts: 1_700_000_000_000, value: 41.5, dim: 1 });
    expect(run(cfg, rec('fast')).reason).toBe('wrong_type');
    expect(run(cfg, rec('NaN')).reason).toBe('not_finite');
    expect(run(cfg, rec('1e999')).reason).toBe('not_finite');
    expect(run(cfg, rec('')).reason).toBe('missing_field');
    expect(run(cfg, rec(null)).reason).toBe('missing_field');
    // kafkajs reports -1 when a record carries no timestamp.
    expect(run(cfg, rec('1', { timestamp: -1 })).reason).toBe('bad_timestamp');
  });

  it('json: a dotted path, several paths as a vector, array indices', () => {
    const one: MessageDecoding = { topic: 't', value: { format: 'json', path: 'timing.total_ms' } };
    expect(run(one, rec('{"timing":{"total_ms":12.5}}')).s.value).toBe(12.5);
    expect(run(one, rec('{"timing":{}}')).reason).toBe('missing_field');
    expect(run(one, rec('{"timing":{"total_ms":"12"}}')).reason).toBe('wrong_type');
    expect(run(one, rec('{"timing":{"total_ms":1e999}}')).reason).toBe('not_finite');
    expect(run(one, rec('{"timing":')).reason).toBe('unparseable');
    expect(run(one, rec('42')).reason).toBe('unparseable');
    const vec: MessageDecoding = { topic: 't', value: { format: 'json', path: ['cpu.user', 'cpu.system', 'disks.1.busy'] } };
    const x = run(vec, rec('{"cpu":{"user":0.5,"system":0.25},"disks":[{"busy":0},{"busy":0.9}]}'));
    expect(x.reason).toBeNull();
    expect(x.s.dim).toBe(3);
    expect(Array.from(x.s.vector.subarray(0, 3))).toEqual([0.5, 0.25, 0.9]);
    expect(run(vec, rec('{"cpu":{"user":0.5,"system":0.25},"disks":[]}')).reason).toBe('missing_field');
  });

  it('csv: columns, a delimiter, quoting', () => {
    const cfg: MessageDecoding = { topic: 't', value: { format: 'csv', column: [1, 3], delimiter: '|' }, key: { from: 'column', column: 0 } };
    const x = run(cfg, rec('"eu|west"|1.5|junk|2.5\r\n'));
    expect(x.reason).toBeNull();
    expect(x.s.stream).toBe('t:eu|west');
    expect(Array.from(x.s.vector.subarray(0, 2))).toEqual([1.5, 2.5]);
    expect(run(cfg, rec('a|1.5')).reason).toBe('missing_field');
    expect(run(cfg, rec('a|"1.5')).reason).toBe('unparseable');
    expect(run(cfg, rec('|1|x|2')).reason).toBe('missing_stream');
  });

  it('oversized values are rejected before parsing', () => {
    const cfg: MessageDecoding = { topic: 't', value: { format: 'number' }, maxBytes: 8 };
    expect(run(cfg, rec('123456789')).reason).toBe('oversized');
    expect(run(cfg, rec('12345678')).reason).toBeNull();
    // 3 characters, 9 bytes of UTF-8: the limit is in bytes.
    expect(run(cfg, rec(null, { value: '中中中' })).reason).toBe('oversized');
  });
});

describe('message decoder: stream keys and event time', () => {
  const json = (extra: Partial<MessageDecoding>): MessageDecoding => ({ topic: 'checkout', value: { format: 'json', path: 'ms' }, ...extra });

  it('combines the topic with the message key, a field or a header', () => {
    expect(run(json({ key: { from: 'message_key' } }), rec('{"ms":1}', { key: Buffer.from('eu-1') })).s.stream).toBe('checkout:eu-1');
    expect(run(json({ key: { from: 'message_key' } }), rec('{"ms":1}')).reason).toBe('missing_stream');
    expect(run(json({ key: { from: 'field', path: 'route.name' } }), rec('{"ms":1,"route":{"name":"/pay"}}')).s.stream).toBe('checkout:/pay');
    expect(run(json({ key: { from: 'field', path: 'shard' } }), rec('{"ms":1,"shard":7}')).s.stream).toBe('checkout:7');
    expect(run(json({ key: { from: 'field', path: 'shard' } }), rec('{"ms":1,"shard":[7]}')).reason).toBe('wrong_type');
    expect(run(json({ key: { from: 'field', path: 'shard' } }), rec('{"ms":1}')).reason).toBe('missing_stream');
    expect(run(json({ key: { from: 'header', name: 'region' } }), rec('{"ms":1}', { headers: { region: Buffer.from('us') } })).s.stream).toBe('checkout:us');
    expect(run(json({ key: { from: 'header', name: 'region' } }), rec('{"ms":1}')).reason).toBe('missing_stream');
  });

  it('reuses the combined stream name for a repeated key', () => {
    const d = makeMessageDecoder(json({ key: { from: 'message_key' } }));
    const a = new EventSlot();
    const b = new EventSlot();
    d(rec('{"ms":1}', { key: Buffer.from('k') }), a);
    d(rec('{"ms":2}', { key: Buffer.from('k') }), b);
    expect(a.stream).toBe('checkout:k');
    expect(b.stream).toBe(a.stream);
  });

  it('reads event time from a field in ms, s or RFC 3339', () => {
    const t = (unit: 'ms' | 's' | 'rfc3339', v: string) => run(json({ time: { from: 'field', path: 'at', unit } }), rec(`{"ms":1,"at":${v}}`));
    expect(t('ms', '1700000000123').s.ts).toBe(1700000000123);
    expect(t('s', '1700000000.5').s.ts).toBe(1700000000500);
    expect(t('s', '"1700000000"').s.ts).toBe(1700000000000);
    expect(t('rfc3339', '"2024-03-10T02:30:00-08:00"').s.ts).toBe(Date.UTC(2024, 2, 10, 10, 30));
    expect(t('rfc3339', '1700000000').reason).toBe('wrong_type');
    expect(t('rfc3339', '"2024-03-10"').reason).toBe('bad_timestamp');
    expect(t('s', '1e13').reason).toBe('bad_timestamp');
    expect(t('ms', 'true').reason).toBe('wrong_type');
    expect(run(json({ time: { from: 'field', path: 'at', unit: 'ms' } }), rec('{"ms":1}')).reason).toBe('missing_field');
    const h = run(json({ time: { from: 'header', name: 'sent', unit: 'ms' } }), rec('{"ms":1}', { headers: { sent: '1700000000999' } }));
    expect(h.s.ts).toBe(1700000000999);
  });
});

describe('message decoder: configuration errors name the key', () => {
  const bad: [unknown, RegExp][] = [
    [{ value: { format: 'number' } }, /^topics\[2\]\.topic: expected a non-empty string/],
    [{ topic: 't', value: { format: 'xml' } }, /^topics\[2\]\.value\.format: expected one of number, json, csv/],
    [{ topic: 't', value: { format: 'json' } }, /^topics\[2\]\.value\.path: expected a dotted field path/],
    [{ topic: 't', value: { format: 'json', path: 'a..b' } }, /^topics\[2\]\.value\.path: empty segment/],
    [{ topic: 't', value: { format: 'json', path: ['a', 'b', 'c', 'd', 'e', 'f', 'g', 'h', 'i'] } }, /^topics\[2\]\.value\.path: expected 1 to 8 paths/],
    [{ topic: 't', value: { format: 'csv', column: -1 } }, /^topics\[2\]\.value\.column: expected a 0-based column index/],
    [{ topic: 't', value: { format: 'csv', column: 0, delimiter: '::' } }, /^topics\[2\]\.value\.delimiter/],
    [{ topic: 't', value: { format: 'number' }, key: { from: 'field', path: 'x' } }, /^topics\[2\]\.key\.from: field needs value\.format json/],
    [{ topic: 't', value: { format: 'json', path: 'x' }, key: { from: 'offset' } }, /^topics\[2\]\.key\.from: expected one of/],
    [{ topic: 't', value: { format: 'json', path: 'x' }, time: { from: 'field', path: 'ts' } }, /^topics\[2\]\.time\.unit: expected one of ms, s, rfc3339/],
    [{ topic: 't', value: { format: 'number' }, maxBytes: 0 }, /^topics\[2\]\.maxBytes: expected an integer >= 1/],
    [{ topic: 't', value: { format: 'number' }, colour: 'red' }, /^topics\[2\]\.colour: unknown key/],
  ];
  it.each(bad)('%j', (cfg, message) => {
    expect(() => validateMessageDecoding(cfg, 'topics[2]')).toThrow(message);
  });

  it('accepts a configuration written in YAML', () => {
    const cfg = validateMessageDecoding(
      YAML.parse(`
topic: checkout-latency
value: { format: json, path: timing.total_ms }
key: { from: field, path: route }
time: { from: field, path: at, unit: rfc3339 }
maxBytes: 4096
`),
    );
    const x = run(cfg, rec('{"timing":{"total_ms":88},"route":"/cart","at":"2024-05-01T10:00:00.250Z"}'));
    expect(x.reason).toBeNull();
    expect(x.s).toMatchObject({ stream: 'checkout-latency:/cart', ts: Date.UTC(2024, 4, 1, 10, 0, 0, 250), value: 88 });
  });
});
