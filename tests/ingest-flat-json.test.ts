import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { EventSlot } from '../src/ingest/event.js';
import { FlatJsonScanner } from '../src/ingest/flat-json.js';
import { makeMessageDecoder, type MessageDecoding } from '../src/ingest/message-decoder.js';
import type { RawRecord } from '../src/ingest/source.js';

function record(value: string, key: string | null = 'svc-1'): RawRecord {
  return { partition: 't-0', offset: 0, key: key === null ? null : Buffer.from(key), value: Buffer.from(value), timestamp: 1_700_000_000_000, headers: {}, topic: 't' };
}

/** The same record with its value also given in place, inside a larger array whose neighbouring bytes look like
 *  JSON (a reader that strays past the range would take them), as the consumer thread's packed batches give it. */
function recordInPlace(value: string, key: string | null, before: string, after: string): RawRecord {
  const v = Buffer.from(value);
  const bytes = Buffer.concat([Buffer.from(before), v, Buffer.from(after)]);
  return { ...record(value, key), valueBytes: bytes, valueStart: before.length, valueEnd: before.length + v.length };
}

const configs: MessageDecoding[] = [
  { topic: 't', value: { format: 'json', path: 'value' }, key: { from: 'message_key' }, time: { from: 'field', path: 'ts', unit: 'ms' } },
  { topic: 't', value: { format: 'json', path: 'v' }, key: { from: 'field', path: 'svc' }, time: { from: 'field', path: 'ts', unit: 's' } },
  { topic: 't', value: { format: 'json', path: ['a', 'b'] }, time: { from: 'record' } },
  { topic: 't', value: { format: 'json', path: 'value' }, time: { from: 'field', path: 'when', unit: 'rfc3339' } },
];

/** Any JSON value, flat or not, that a producer might put in a field. */
const anyValue = fc.oneof(
  fc.double({ noNaN: false }).map((x) => (Number.isFinite(x) ? x : 1e400)),
  fc.integer(),
  fc.constantFrom(1_700_000_000_000, 1_700_000_000, '2024-05-01T12:00:00Z', '2024-05-01T12:00:00.5+02:00', 'NaN', '', 'svc-"x', 'a\\b'),
  fc.string(),
  fc.boolean(),
  fc.constant(null),
  fc.array(fc.integer(), { maxLength: 3 }),
  fc.dictionary(fc.string({ maxLength: 3 }), fc.integer(), { maxKeys: 2 }),
);
const keys = fc.constantFrom('value', 'v', 'ts', 'svc', 'a', 'b', 'when', 'other', 'val\\u0075e');

/** Messages as text: JSON objects with wanted and unwanted keys, spacing, repeated keys; and some broken text. */
const message = fc.oneof(
  fc.array(fc.tuple(keys, anyValue), { maxLength: 6 }).chain((pairs) =>
    fc.constantFrom('', ' ', '\n\t').map((ws) => `${ws}{${pairs.map(([k, v]) => `${ws}"${k}"${ws}:${ws}${v === 1e400 ? '1e400' : JSON.stringify(v)}`).join(',')}${ws}}${ws}`),
  ),
  fc.string({ maxLength: 30 }),
  fc.constantFrom('{"value":1', '{"value":1,}', '{"value":-}', '{"value":01}', '[1,2]', '"x"', '{"value":1}x', '{} {}'),
);

describe('flat JSON fast path of the message decoder', () => {
  for (const [i, cfg] of configs.entries()) {
    it(`agrees with JSON.parse on every message (config ${i})`, () => {
      const fast = makeMessageDecoder(cfg);
      const slow = makeMessageDecoder(cfg, { fastPath: false });
      const a = new EventSlot();
      const b = new EventSlot();
      fc.assert(
        fc.property(message, fc.option(fc.constantFrom('svc-1', 'svc-2', ''), { nil: null }), fc.constantFrom('buffer', 'text', 'in place'), (text, key, given) => {
          const r = given === 'buffer' ? record(text, key) : given === 'text' ? { ...record(text, key), value: text } : recordInPlace(text, key, '{"value":1,', '5,"ts":2}');
          const ra = fast(r, a);
          const rb = slow(record(text, key), b);
          expect(ra).toBe(rb);
          if (ra === null) {
            expect([a.stream, a.ts, a.dim]).toEqual([b.stream, b.ts, b.dim]);
            if (a.dim === 1) expect(Object.is(a.value, b.value)).toBe(true);
            else expect(Array.from(a.vector.subarray(0, a.dim))).toEqual(Array.from(b.vector.subarray(0, b.dim)));
          }
        }),
        { numRuns: Number(process.env.PROPERTY_RUNS ?? 3000) },
      );
    });
  }

  it('reads a message inside a larger array without looking past its range', () => {
    const scanner = new FlatJsonScanner(['value', 'ts', 'svc']);
    for (const [msg, before, after] of [
      ['{"value":1}', '99', '5'],
      ['{"value":-2.5e1 ,"svc":"a-é"}', '{', '"}'],
      ['{"ts":17,"value":null}', 'x', 'l}'],
      ['{"value":true}', '', 'e'],
    ] as const) {
      const bytes = Buffer.from(before + msg + after);
      const from = Buffer.byteLength(before);
      expect(scanner.scan(bytes, from, from + Buffer.byteLength(msg))).toBe(true);
      const parsed = JSON.parse(msg) as Record<string, unknown>;
      if (typeof parsed.value === 'number') expect(scanner.num[0]).toBe(parsed.value);
      if (typeof parsed.svc === 'string') expect(bytes.subarray(scanner.start[2], scanner.end[2]).toString('utf8')).toBe(parsed.svc);
      // Cut one byte short, it is not a whole object.
      expect(scanner.scan(bytes, from, from + Buffer.byteLength(msg) - 1)).toBe(false);
    }
  });

  it('reads the common shape and reuses the stream name of a repeated key', () => {
    const dec = makeMessageDecoder(configs[0]);
    const out = new EventSlot();
    expect(dec(record('{"ts":1700000000123,"value":41.7}'), out)).toBeNull();
    expect([out.stream, out.ts, out.value]).toEqual(['t:svc-1', 1700000000123, 41.7]);
    const first = out.stream;
    expect(dec(record('{"ts":1700000000124,"value":42}'), out)).toBeNull();
    expect(out.stream).toBe(first);
    expect(dec(record('{"ts":1700000000125,"value":43}', 'svc-2'), out)).toBeNull();
    expect(out.stream).toBe('t:svc-2');
    expect(dec(record('{"ts":1700000000125,"value":"43"}'), out)).toBe('wrong_type');
    expect(dec(record('{"ts":1700000000125,"value":1e400}'), out)).toBe('not_finite');
    expect(dec(record('{"ts":1700000000125,"value":{"ms":4}}'), out)).toBe('wrong_type');
  });
});
