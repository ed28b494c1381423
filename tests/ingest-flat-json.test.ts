import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { EventSlot } from '../src/ingest/event.js';
import { makeMessageDecoder, type MessageDecoding } from '../src/ingest/message-decoder.js';
import type { RawRecord } from '../src/ingest/source.js';

function record(value: string, key: string | null = 'svc-1'): RawRecord {
  return { partition: 't-0', offset: 0, key: key === null ? null : Buffer.from(key), value: Buffer.from(value), timestamp: 1_700_000_000_000, headers: {}, topic: 't' };
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
        fc.property(message, fc.option(fc.constantFrom('svc-1', 'svc-2', ''), { nil: null }), (text, key) => {
          const ra = fast(record(text, key), a);
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
