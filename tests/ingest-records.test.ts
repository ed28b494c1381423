import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { DECODE_REJECTIONS, EventSlot, type DecodeRejection } from '../src/ingest/event.js';
import {
  CsvDecoder,
  NdjsonDecoder,
  decodeCsvLine,
  decodeNdjsonLine,
  decodeNdjsonLineGeneral,
  decoderForFirstLine,
  detectFormat,
  parseCsvHeader,
  parseRfc3339,
  scanJsonNumber,
  scanJsonNumberBytes,
  StreamInterner,
} from '../src/ingest/records.js';

function nd(line: string): { r: DecodeRejection | null; s: EventSlot } {
  const s = new EventSlot();
  return { r: decodeNdjsonLine(line, s), s };
}
function csv(line: string): { r: DecodeRejection | null; s: EventSlot } {
  const s = new EventSlot();
  return { r: decodeCsvLine(line, s), s };
}

describe('NDJSON records', () => {
  it('decodes the common shape on the fast path', () => {
    const d = new NdjsonDecoder();
    const s = new EventSlot();
    const one = '{"ts":1700000000123,"stream":"checkout","value":41.25}';
    expect(d.decode(one, 0, one.length, s)).toBeNull();
    expect(s).toMatchObject({ ts: 1700000000123, stream: 'checkout', value: 41.25, dim: 1 });
    const vec = '{"ts":"2024-01-01T00:00:00.5Z","stream":"v","value":[1,-2.5,3e2]}';
    expect(d.decode(vec, 0, vec.length, s)).toBeNull();
    expect(s.ts).toBe(Date.UTC(2024, 0, 1) + 500);
    expect(s.dim).toBe(3);
    expect(Array.from(s.vector.subarray(0, 3))).toEqual([1, -2.5, 300]);
    expect(d.fallbacks).toBe(0);
  });

  it('decodes a range of a larger string', () => {
    const text = 'xx{"ts":5,"stream":"a","value":7}yy';
    const d = new NdjsonDecoder();
    const s = new EventSlot();
    expect(d.decode(text, 2, text.length - 2, s)).toBeNull();
    expect(s).toMatchObject({ ts: 5, stream: 'a', value: 7 });
  });

  it('falls back to JSON.parse for other shapes and agrees', () => {
    const lines = [
      '{ "ts": 5, "stream": "a", "value": 7 }',
      '{"stream":"a","value":7,"ts":5}',
      '{"ts":5,"stream":"a","value":7,"host":"x"}',
      '{"ts":5,"stream":"a\\u0062","value":7}',
    ];
    for (const l of lines) {
      const { r, s } = nd(l);
      expect(r).toBeNull();
      expect(s.ts).toBe(5);
      expect(s.value).toBe(7);
    }
    expect(nd(lines[3]).s.stream).toBe('ab');
  });

  // One line per rejection reason a record file can produce (oversized comes from the line reader).
  const cases: [string, DecodeRejection][] = [
    ['not json at all', 'unparseable'],
    ['{"ts":5,"stream":"a","value":NaN}', 'unparseable'],
    ['{"ts":5,"stream":"a","value":Infinity}', 'unparseable'],
    ['{"ts":5,"stream":"a","value":-Infinity}', 'unparseable'],
    ['[1,2,3]', 'unparseable'],
    ['', 'unparseable'],
    ['{"ts":5,"stream":"a","value":01}', 'unparseable'],
    ['{"stream":"a","value":1}', 'missing_field'],
    ['{"ts":5,"stream":"a"}', 'missing_field'],
    ['{"ts":5,"stream":"a","value":null}', 'missing_field'],
    ['{"ts":true,"stream":"a","value":1}', 'wrong_type'],
    ['{"ts":5,"stream":7,"value":1}', 'wrong_type'],
    ['{"ts":5,"stream":"a","value":"12"}', 'wrong_type'],
    ['{"ts":5,"stream":"a","value":"NaN"}', 'wrong_type'],
    ['{"ts":5,"stream":"a","value":[1,"2"]}', 'wrong_type'],
    ['{"ts":5,"stream":"a","value":{"x":1}}', 'wrong_type'],
    ['{"ts":"yesterday","stream":"a","value":1}', 'bad_timestamp'],
    ['{"ts":1e300,"stream":"a","value":1}', 'bad_timestamp'],
    ['{"ts":"2023-02-29T00:00:00Z","stream":"a","value":1}', 'bad_timestamp'],
    ['{"ts":5,"stream":"a","value":1e400}', 'not_finite'],
    ['{"ts":5,"stream":"a","value":[1,-1e999]}', 'not_finite'],
    ['{"ts":5,"stream":"a","value":[]}', 'wrong_dimension'],
    ['{"ts":5,"stream":"a","value":[1,2,3,4,5,6,7,8,9]}', 'wrong_dimension'],
    ['{"ts":5,"value":1}', 'missing_stream'],
    ['{"ts":5,"stream":"","value":1}', 'missing_stream'],
    ['{"ts":5,"stream":null,"value":1}', 'missing_stream'],
  ];
  it.each(cases)('%s -> %s', (line, reason) => {
    expect(nd(line).r).toBe(reason);
    expect(decodeNdjsonLineGeneral(line, new EventSlot())).toBe(reason);
  });

  it('covers every rejection reason except oversized', () => {
    const seen = new Set(cases.map((c) => c[1]));
    expect(DECODE_REJECTIONS.filter((r) => !seen.has(r))).toEqual(['oversized']);
  });

  it('reads numbers exactly as JSON.parse does', () => {
    for (const t of ['0', '-0', '1.5', '123456789012345678', '0.1', '1e22', '1e23', '9007199254740993', '2.2250738585072014e-308', '5e-324', '1.7976931348623157e308', '123.456e-5']) {
      const v = scanJsonNumber(t, 0, t.length);
      expect(Object.is(v, JSON.parse(t) as number)).toBe(true);
      // The byte reader, on the number's bytes inside a larger array (digits on both sides it must not read).
      const bytes = Buffer.from(`7${t}9`);
      expect(Object.is(scanJsonNumberBytes(bytes, 1, bytes.length - 1), JSON.parse(t) as number)).toBe(true);
    }
    for (const t of ['-', '1.', '.5', '+1', '1e', 'e5', '-a']) {
      expect(scanJsonNumber(t, 0, t.length)).toBeNaN();
      expect(scanJsonNumberBytes(Buffer.from(t), 0, t.length)).toBeNaN();
    }
  });

  it('agrees with the JSON.parse path on randomized lines (fast-check)', () => {
    const numText = fc.oneof(
      fc.double({ noNaN: true, noDefaultInfinity: true }).map((x) => JSON.stringify(x)),
      fc.integer().map(String),
      fc.constantFrom('1e400', '-1e400', '-0', '1E5', '0.1e-3', '123456789012345678901234', '5e-324', '01', '1.', 'NaN', '"12"', 'true', 'null'),
    );
    const tsText = fc.oneof(
      fc.integer({ min: -1e13, max: 1e13 }).map(String),
      fc.constantFrom('1e300', '"2024-02-29T23:59:60.123+05:30"', '"2024-01-01 00:00:00z"', '"2024-13-01T00:00:00Z"', '"x"', 'false', 'null'),
      fc.date({ min: new Date(-1e14), max: new Date(1e14), noInvalidDate: true }).map((d) => JSON.stringify(d.toISOString())),
    );
    const streamText = fc.oneof(
      fc.string().map((s) => JSON.stringify(s)),
      fc.constantFrom('"checkout"', '""', '7', 'null', '"a\\"b"', '"\u00e9\u4e2d"'),
    );
    const valueText = fc.oneof(numText, fc.array(numText, { maxLength: 10 }).map((a) => `[${a.join(',')}]`));
    const line = fc
      .tuple(tsText, streamText, valueText, fc.nat(10), fc.string({ maxLength: 3 }), fc.nat(60))
      .map(([t, s, v, variant, junk, cut]) => {
        let l = `{"ts":${t},"stream":${s},"value":${v}}`;
        if (variant === 1) l = `{"stream":${s},"ts":${t},"value":${v}}`;
        if (variant === 2) l = l.replace(',', ', ');
        if (variant === 3) l = l.slice(0, Math.min(cut, l.length));
        if (variant === 4) l = l + junk;
        if (variant === 5) l = `{"ts":${t},"stream":${s}}`;
        return l;
      });
    fc.assert(
      fc.property(line, (l) => {
        const fast = new EventSlot();
        const slow = new EventSlot();
        const a = decodeNdjsonLine(l, fast);
        const b = decodeNdjsonLineGeneral(l, slow);
        expect(a).toBe(b);
        if (a === null) {
          expect(Object.is(fast.ts, slow.ts)).toBe(true);
          expect(fast.stream).toBe(slow.stream);
          expect(fast.dim).toBe(slow.dim);
          if (fast.dim === 1) expect(Object.is(fast.value, slow.value)).toBe(true);
          else expect(Array.from(fast.vector.subarray(0, fast.dim))).toEqual(Array.from(slow.vector.subarray(0, slow.dim)));
        }
      }),
      { numRuns: 3000, seed: 42 },
    );
  });
});

describe('RFC 3339 timestamps (RFC 3339 section 5.6)', () => {
  const p = (s: string): number => parseRfc3339(s, 0, s.length);
  it('accepts offsets, fractions and the allowed separators', () => {
    const base = Date.UTC(2024, 5, 30, 12, 34, 56);
    expect(p('2024-06-30T12:34:56Z')).toBe(base);
    expect(p('2024-06-30t12:34:56z')).toBe(base);
    expect(p('2024-06-30 12:34:56Z')).toBe(base);
    expect(p('2024-06-30T14:34:56+02:00')).toBe(base);
    expect(p('2024-06-30T07:04:56-05:30')).toBe(base);
    expect(p('2024-06-30T12:34:56.7Z')).toBe(base + 700);
    expect(p('2024-06-30T12:34:56.123Z')).toBe(base + 123);
    expect(p('2024-06-30T12:34:56.123456Z')).toBeCloseTo(base + 123.456, 3);
    expect(p('2024-06-30T12:34:56.999999999+00:00')).toBeCloseTo(base + 999.999999, 3);
    // Leap second (RFC 3339 section 5.7): counted as the next second.
    expect(p('2016-12-31T23:59:60Z')).toBe(Date.UTC(2017, 0, 1));
    expect(p('2024-02-29T00:00:00Z')).toBe(Date.UTC(2024, 1, 29));
    expect(p('2000-02-29T00:00:00Z')).toBe(Date.UTC(2000, 1, 29));
    expect(p('1969-12-31T23:59:59Z')).toBe(-1000);
  });
  it('matches Date.parse (ECMA-262 date-time string format) on random millisecond times', () => {
    fc.assert(
      fc.property(fc.date({ min: new Date('0001-01-01T00:00:00Z'), max: new Date('9998-12-31T23:59:59Z'), noInvalidDate: true }), fc.integer({ min: -23 * 60, max: 23 * 60 }), (d, off) => {
        const local = new Date(d.getTime() + off * 60000).toISOString().slice(0, 23);
        const sign = off < 0 ? '-' : '+';
        const a = Math.abs(off);
        const s = `${local}${sign}${String(Math.floor(a / 60)).padStart(2, '0')}:${String(a % 60).padStart(2, '0')}`;
        expect(p(s)).toBe(Date.parse(s));
        expect(p(s)).toBe(d.getTime());
      }),
      { numRuns: 500, seed: 7 },
    );
  });
  it('rejects malformed date-times', () => {
    for (const s of [
      '2024-06-30T12:34:56', // no offset
      '2024-06-30',
      '2024-6-30T12:34:56Z',
      '2024-06-31T00:00:00Z',
      '2023-02-29T00:00:00Z',
      '1900-02-29T00:00:00Z',
      '2024-00-10T00:00:00Z',
      '2024-06-30T24:00:00Z',
      '2024-06-30T12:60:00Z',
      '2024-06-30T12:00:61Z',
      '2024-06-30T12:00:00.Z',
      '2024-06-30T12:00:00+2:00',
      '2024-06-30T12:00:00+24:00',
      '2024-06-30T12:00:00+02:60',
      '2024-06-30T12:00:00Zjunk',
      '2024-06-30X12:00:00Z',
      '1700000000000',
    ])
      expect(p(s), s).toBeNaN();
  });
});

describe('CSV records', () => {
  it('decodes scalars, vectors, RFC 3339 times and quoted fields', () => {
    let x = csv('1700000000000,checkout,41.5');
    expect(x.r).toBeNull();
    expect(x.s).toMatchObject({ ts: 1700000000000, stream: 'checkout', value: 41.5, dim: 1 });
    x = csv('2024-01-01T00:00:01Z,vec,1;2.5;-3');
    expect(x.r).toBeNull();
    expect(x.s.ts).toBe(Date.UTC(2024, 0, 1, 0, 0, 1));
    expect(x.s.dim).toBe(3);
    expect(Array.from(x.s.vector.subarray(0, 3))).toEqual([1, 2.5, -3]);
    x = csv('5,"a,b ""quoted""",+7');
    expect(x.r).toBeNull();
    expect(x.s.stream).toBe('a,b "quoted"');
    expect(x.s.value).toBe(7);
    x = csv('"5","s"," 1.5 "');
    expect(x.r).toBeNull();
    expect(x.s.value).toBe(1.5);
  });
  const cases: [string, DecodeRejection][] = [
    ['5,"a,1', 'unparseable'],
    ['5,a,1,extra', 'unparseable'],
    ['5,a', 'missing_field'],
    [',a,1', 'missing_field'],
    ['5,a,', 'missing_field'],
    ['5,a,abc', 'wrong_type'],
    ['5,a,1;;2', 'wrong_type'],
    ['5,a,0x10', 'wrong_type'],
    ['soon,a,1', 'bad_timestamp'],
    ['1e300,a,1', 'bad_timestamp'],
    ['5,a,NaN', 'not_finite'],
    ['5,a,-Infinity', 'not_finite'],
    ['5,a,1e400', 'not_finite'],
    ['5,a,1;inf', 'not_finite'],
    ['5,a,1;2;3;4;5;6;7;8;9', 'wrong_dimension'],
    ['5,,1', 'missing_stream'],
  ];
  it.each(cases)('%s -> %s', (line, reason) => {
    expect(csv(line).r).toBe(reason);
  });
  it('reads the column order from the header', () => {
    const d = new CsvDecoder(parseCsvHeader('\ufeffvalue,TS,stream'));
    const s = new EventSlot();
    const line = '3.5,10,x';
    expect(d.decode(line, 0, line.length, s)).toBeNull();
    expect(s).toMatchObject({ ts: 10, stream: 'x', value: 3.5 });
    expect(() => parseCsvHeader('time,stream,value')).toThrow(/no column named "ts"/);
    expect(() => parseCsvHeader('ts,ts,stream,value')).toThrow(/appears twice/);
  });
  it('quoted and unquoted forms of the same record agree (fast-check)', () => {
    fc.assert(
      fc.property(fc.integer({ min: 0, max: 1e13 }), fc.stringMatching(/^[a-z0-9_-]{1,12}$/), fc.array(fc.double({ noNaN: true, noDefaultInfinity: true, min: -1e6, max: 1e6 }), { minLength: 1, maxLength: 8 }), (ts, name, vals) => {
        const v = vals.map(String).join(';');
        const a = csv(`${ts},${name},${v}`);
        const b = csv(`"${ts}","${name}","${v}"`);
        expect(a.r).toBeNull();
        expect(b.r).toBeNull();
        expect(a.s.dim).toBe(vals.length);
        if (vals.length === 1) expect(Object.is(a.s.value, b.s.value) && a.s.value === vals[0]).toBe(true);
        else expect(Array.from(a.s.vector.subarray(0, a.s.dim))).toEqual(vals.map((x) => x + 0));
      }),
      { numRuns: 300, seed: 3 },
    );
  });
});

describe('format detection and interning', () => {
  it('tells NDJSON from CSV by the first line', () => {
    expect(detectFormat('{"ts":1,"stream":"a","value":1}')).toBe('ndjson');
    expect(detectFormat('\ufeff  {"ts":1}')).toBe('ndjson');
    expect(detectFormat('ts,stream,value')).toBe('csv');
    expect(detectFormat('stream,value,ts')).toBe('csv');
    expect(detectFormat('hello world')).toBeNull();
    expect(decoderForFirstLine('ts,stream,value').skipFirst).toBe(true);
    // An unrecognised first line is a malformed NDJSON record, counted, not fatal.
    const g = decoderForFirstLine('garbage');
    expect(g).toMatchObject({ format: 'ndjson', skipFirst: false });
    expect(g.decoder.decode('garbage', 0, 7, new EventSlot())).toBe('unparseable');
    expect(() => decoderForFirstLine('ts,stream', 'csv')).toThrow(/no column named "value"/);
  });
  it('returns the same string object for the same name, and stays bounded', () => {
    const i = new StreamInterner(4);
    const a = i.intern('xx checkout-latency-ms yy', 3, 22);
    const b = i.intern('{"stream":"checkout-latency-ms"}', 11, 30);
    expect(a).toBe('checkout-latency-ms');
    expect(b).toBe(a);
    for (let k = 0; k < 100; k++) expect(i.intern(`s${k}`, 0, `s${k}`.length)).toBe(`s${k}`);
    expect(i.intern('checkout-latency-ms', 0, 19)).toBe('checkout-latency-ms');
  });
});
