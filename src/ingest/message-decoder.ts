/**
 * Decoding of Kafka message values for the daemon, configured per topic.
 *
 *   value:  { format: number }                                   plain text number
 *           { format: json, path: timing.total_ms }              dotted path (array indices as numbers: a.0.b)
 *           { format: json, path: [cpu.user, cpu.system] }       several paths: a vector (2..8)
 *           { format: csv, column: 2, delimiter: ',' }           0-based column(s), RFC 4180 quoting
 *   key:    { from: message_key } | { from: field, path: ... } (json) | { from: column, column: n } (csv)
 *           | { from: header, name: ... }; absent: the stream is the topic alone. Else the stream is `${topic}:${key}`.
 *   time:   { from: record } (default: the Kafka record timestamp) | { from: field, path, unit } (json)
 *           | { from: column, column, unit } (csv) | { from: header, name, unit }; unit: ms | s | rfc3339.
 *   maxBytes: values longer than this are rejected as oversized (default 1 MiB).
 *
 * Rejection order: oversized, missing value (a tombstone), unparseable, time, stream, value (as in records.ts).
 */
import { FIELD_ABSENT, FIELD_BOOLEAN, FIELD_NULL, FIELD_NUMBER, FIELD_STRING, FlatJsonScanner } from './flat-json.js';
import { KeyTable } from './key-table.js';
import { EventSlot, MAX_DIM, type DecodeRejection } from './event.js';
import { checkEpochMs, parseRfc3339, parseTextNumber, splitCsvLine } from './records.js';
import type { RawRecord } from './source.js';

export type TimeUnit = 'ms' | 's' | 'rfc3339';
export const TIME_UNITS: readonly TimeUnit[] = ['ms', 's', 'rfc3339'];

export type ValueDecoding =
  | { format: 'number' }
  | { format: 'json'; path: string | string[] }
  | { format: 'csv'; column: number | number[]; delimiter?: string };

export type KeyDecoding =
  | { from: 'message_key' }
  | { from: 'field'; path: string }
  | { from: 'column'; column: number }
  | { from: 'header'; name: string };

export type TimeDecoding =
  | { from: 'record' }
  | { from: 'field'; path: string; unit: TimeUnit }
  | { from: 'column'; column: number; unit: TimeUnit }
  | { from: 'header'; name: string; unit: TimeUnit };

export interface MessageDecoding {
  topic: string;
  value: ValueDecoding;
  key?: KeyDecoding;
  time?: TimeDecoding;
  maxBytes?: number;
}

export type MessageDecoder = (record: RawRecord, out: EventSlot) => DecodeRejection | null;

// ---------------------------------------------------------------------------------------------------------------
// Validation

export class DecodingConfigError extends Error {}

type Obj = Record<string, unknown>;

function fail(where: string, msg: string): never {
  throw new DecodingConfigError(`${where}: ${msg}`);
}

function mapping(v: unknown, where: string): Obj {
  if (typeof v !== 'object' || v === null || Array.isArray(v)) fail(where, 'expected a mapping');
  return v as Obj;
}

function onlyKeys(o: Obj, where: string, keys: string[]): void {
  for (const k of Object.keys(o)) if (!keys.includes(k)) fail(`${where}.${k}`, `unknown key (allowed here: ${keys.join(', ')})`);
}

function path(v: unknown, where: string): string {
  if (typeof v !== 'string' || v.length === 0) fail(where, `expected a dotted field path such as timing.total_ms, got ${JSON.stringify(v)}`);
  if (v.split('.').some((s) => s.length === 0)) fail(where, `empty segment in path ${JSON.stringify(v)}`);
  return v;
}

function column(v: unknown, where: string): number {
  if (typeof v !== 'number' || !Number.isInteger(v) || v < 0) fail(where, `expected a 0-based column index, got ${JSON.stringify(v)}`);
  return v;
}

function unit(v: unknown, where: string): TimeUnit {
  if (typeof v !== 'string' || !(TIME_UNITS as readonly string[]).includes(v)) fail(where, `expected one of ${TIME_UNITS.join(', ')}, got ${JSON.stringify(v)}`);
  return v as TimeUnit;
}

function nonEmpty(v: unknown, where: string): string {
  if (typeof v !== 'string' || v.length === 0) fail(where, `expected a non-empty string, got ${JSON.stringify(v)}`);
  return v;
}

/**
 * Checks a decoding configuration (e.g. parsed from YAML) and returns it typed. Errors name the key:
 * `<where>.value.path: ...`.
 */
export function validateMessageDecoding(raw: unknown, where = 'decoding'): MessageDecoding {
  const o = mapping(raw, where);
  onlyKeys(o, where, ['topic', 'value', 'key', 'time', 'maxBytes']);
  const topic = nonEmpty(o.topic, `${where}.topic`);
  const vw = `${where}.value`;
  const v = mapping(o.value, vw);
  let value: ValueDecoding;
  switch (v.format) {
    case 'number':
      onlyKeys(v, vw, ['format']);
      value = { format: 'number' };
      break;
    case 'json': {
      onlyKeys(v, vw, ['format', 'path']);
      if (Array.isArray(v.path)) {
        if (v.path.length < 1 || v.path.length > MAX_DIM) fail(`${vw}.path`, `expected 1 to ${MAX_DIM} paths, got ${v.path.length}`);
        value = { format: 'json', path: v.path.map((p, k) => path(p, `${vw}.path[${k}]`)) };
      } else value = { format: 'json', path: path(v.path, `${vw}.path`) };
      break;
    }
    case 'csv': {
      onlyKeys(v, vw, ['format', 'column', 'delimiter']);
      let col: number | number[];
      if (Array.isArray(v.column)) {
        if (v.column.length < 1 || v.column.length > MAX_DIM) fail(`${vw}.column`, `expected 1 to ${MAX_DIM} columns, got ${v.column.length}`);
        col = v.column.map((c, k) => column(c, `${vw}.column[${k}]`));
      } else col = column(v.column, `${vw}.column`);
      const d = v.delimiter ?? ',';
      if (typeof d !== 'string' || d.length !== 1 || d === '"') fail(`${vw}.delimiter`, `expected one character other than '"', got ${JSON.stringify(d)}`);
      value = { format: 'csv', column: col, delimiter: d };
      break;
    }
    default:
      fail(`${vw}.format`, `expected one of number, json, csv, got ${JSON.stringify(v.format)}`);
  }
  const cfg: MessageDecoding = { topic, value };
  const fieldFrom = value.format === 'json' ? 'field' : value.format === 'csv' ? 'column' : null;

  if (o.key !== undefined) {
    const kw = `${where}.key`;
    const k = mapping(o.key, kw);
    switch (k.from) {
      case 'message_key':
        onlyKeys(k, kw, ['from']);
        cfg.key = { from: 'message_key' };
        break;
      case 'header':
        onlyKeys(k, kw, ['from', 'name']);
        cfg.key = { from: 'header', name: nonEmpty(k.name, `${kw}.name`) };
        break;
      case 'field':
        if (fieldFrom !== 'field') fail(`${kw}.from`, 'field needs value.format json');
        onlyKeys(k, kw, ['from', 'path']);
        cfg.key = { from: 'field', path: path(k.path, `${kw}.path`) };
        break;
      case 'column':
        if (fieldFrom !== 'column') fail(`${kw}.from`, 'column needs value.format csv');
        onlyKeys(k, kw, ['from', 'column']);
        cfg.key = { from: 'column', column: column(k.column, `${kw}.column`) };
        break;
      default:
        fail(`${kw}.from`, `expected one of message_key, field, column, header, got ${JSON.stringify(k.from)}`);
    }
  }
  if (o.time !== undefined) {
    const tw = `${where}.time`;
    const t = mapping(o.time, tw);
    switch (t.from) {
      case 'record':
        onlyKeys(t, tw, ['from']);
        cfg.time = { from: 'record' };
        break;
      case 'header':
        onlyKeys(t, tw, ['from', 'name', 'unit']);
        cfg.time = { from: 'header', name: nonEmpty(t.name, `${tw}.name`), unit: unit(t.unit, `${tw}.unit`) };
        break;
      case 'field':
        if (fieldFrom !== 'field') fail(`${tw}.from`, 'field needs value.format json');
        onlyKeys(t, tw, ['from', 'path', 'unit']);
        cfg.time = { from: 'field', path: path(t.path, `${tw}.path`), unit: unit(t.unit, `${tw}.unit`) };
        break;
      case 'column':
        if (fieldFrom !== 'column') fail(`${tw}.from`, 'column needs value.format csv');
        onlyKeys(t, tw, ['from', 'column', 'unit']);
        cfg.time = { from: 'column', column: column(t.column, `${tw}.column`), unit: unit(t.unit, `${tw}.unit`) };
        break;
      default:
        fail(`${tw}.from`, `expected one of record, field, column, header, got ${JSON.stringify(t.from)}`);
    }
  }
  if (o.maxBytes !== undefined) {
    const m = o.maxBytes;
    if (typeof m !== 'number' || !Number.isInteger(m) || m < 1) fail(`${where}.maxBytes`, `expected an integer >= 1, got ${JSON.stringify(m)}`);
    cfg.maxBytes = m;
  }
  return cfg;
}

// ---------------------------------------------------------------------------------------------------------------
// Decoding

function compilePath(p: string): string[] {
  return p.split('.');
}

function lookup(o: unknown, segs: string[]): unknown {
  let cur = o;
  for (const s of segs) {
    if (cur === null || typeof cur !== 'object') return undefined;
    if (Array.isArray(cur)) {
      if (!/^(0|[1-9]\d*)$/.test(s)) return undefined;
      cur = cur[Number(s)];
    } else {
      if (!Object.prototype.hasOwnProperty.call(cur, s)) return undefined;
      cur = (cur as Obj)[s];
    }
  }
  return cur;
}

function asText(v: Buffer | string): string {
  return typeof v === 'string' ? v : v.toString('utf8');
}

/** The text of UTF-8 bytes b[from, to) (invalid sequences become U+FFFD, as Buffer decoding does everywhere). */
function utf8Text(b: Uint8Array, from: number, to: number): string {
  return Buffer.from(b.buffer, b.byteOffset + from, to - from).toString('utf8');
}

function tooLong(v: Buffer | string, maxBytes: number): boolean {
  if (typeof v !== 'string') return v.length > maxBytes;
  // A UTF-16 unit is 1 to 3 UTF-8 bytes (a surrogate pair is 4 for 2): count bytes only when it matters.
  if (v.length > maxBytes) return true;
  if (v.length * 3 <= maxBytes) return false;
  return Buffer.byteLength(v, 'utf8') > maxBytes;
}

/** Converts a time value in the configured unit to epoch ms; writes out.ts. */
function timeValue(v: unknown, u: TimeUnit, out: EventSlot): DecodeRejection | null {
  if (v === undefined || v === null) return 'missing_field';
  let ms: number;
  if (u === 'rfc3339') {
    if (typeof v !== 'string') return 'wrong_type';
    ms = parseRfc3339(v, 0, v.length);
  } else {
    let n: number;
    if (typeof v === 'number') n = v;
    else if (typeof v === 'string') {
      const p = parseTextNumber(v);
      if (typeof p !== 'number') return 'bad_timestamp';
      n = p;
    } else return 'wrong_type';
    ms = u === 's' ? n * 1000 : n;
  }
  if (!checkEpochMs(ms)) return 'bad_timestamp';
  out.ts = ms;
  return null;
}

/** A number from a JSON value: numbers only (a numeric string is a wrong type, as in the record files). */
function jsonNumber(v: unknown): number | DecodeRejection {
  if (v === undefined || v === null) return 'missing_field';
  if (typeof v !== 'number') return 'wrong_type';
  return Number.isFinite(v) ? v : 'not_finite';
}

/** Bounded cache from key text to `${topic}:${key}`, so a steady set of keys does not build a string per message. */
class StreamNames {
  private readonly map = new Map<string, string>();
  constructor(
    private readonly topic: string,
    private readonly cap = 10_000,
  ) {}
  get(key: string): string {
    let s = this.map.get(key);
    if (s === undefined) {
      if (this.map.size >= this.cap) this.map.clear();
      s = `${this.topic}:${key}`;
      this.map.set(key, s);
    }
    return s;
  }
}

export interface MessageDecoderOptions {
  /** Read flat JSON objects without JSON.parse (default true); false forces the general path (tests compare the two). */
  fastPath?: boolean;
}

export function makeMessageDecoder(config: MessageDecoding, options: MessageDecoderOptions = {}): MessageDecoder {
  const cfg = validateMessageDecoding(config);
  const maxBytes = cfg.maxBytes ?? 1 << 20;
  const names = new StreamNames(cfg.topic);
  const time = cfg.time ?? { from: 'record' as const };
  const key = cfg.key;
  let lastKey: Buffer | null = null;
  let lastKeyText: string | null = null;
  let lastKeyStream = '';

  const headerText = (r: RawRecord, name: string): string | undefined => {
    const h = r.headers[name];
    return h === undefined ? undefined : asText(h);
  };
  const recordTime = (r: RawRecord, out: EventSlot): DecodeRejection | null => {
    // Kafka uses -1 for "no timestamp".
    if (!(r.timestamp >= 0) || !checkEpochMs(r.timestamp)) return 'bad_timestamp';
    out.ts = r.timestamp;
    return null;
  };
  /** Stream from the message key or a header; undefined when the key comes from inside the value. */
  const outerStream = (r: RawRecord, out: EventSlot): DecodeRejection | null => {
    if (key === undefined) {
      out.stream = cfg.topic;
      return null;
    }
    let k: string | undefined;
    if (key.from === 'message_key') {
      const rk = r.key;
      if (typeof rk === 'string') {
        // A key that crossed from the consumer thread as text: the same string object for a batch's records.
        if (rk === lastKeyText) {
          out.stream = lastKeyStream;
          return null;
        }
        k = rk;
        if (k.length > 0) {
          lastKey = null;
          lastKeyText = k;
          lastKeyStream = names.get(k);
        }
      } else {
        // Most keys repeat: compare bytes with the last key instead of decoding and interning a string per message.
        if (rk !== null && lastKey !== null && rk.length === lastKey.length && rk.equals(lastKey)) {
          out.stream = lastKeyStream;
          return null;
        }
        k = rk === null ? undefined : rk.toString('utf8');
        if (k !== undefined && k.length > 0 && rk !== null) {
          lastKey = Buffer.from(rk);
          lastKeyText = null;
          lastKeyStream = names.get(k);
        }
      }
    }
    else if (key.from === 'header') k = headerText(r, key.name);
    else return null;
    if (k === undefined || k.length === 0) return 'missing_stream';
    out.stream = names.get(k);
    return null;
  };
  const innerKey = (v: unknown, out: EventSlot): DecodeRejection | null => {
    if (v === undefined || v === null || v === '') return 'missing_stream';
    if (typeof v === 'string') out.stream = names.get(v);
    else if (typeof v === 'number' && Number.isFinite(v)) out.stream = names.get(String(v));
    else return 'wrong_type';
    return null;
  };
  const setValues = (vals: (number | DecodeRejection)[], out: EventSlot): DecodeRejection | null => {
    let notFinite = false;
    for (const v of vals) {
      if (v === 'not_finite') notFinite = true;
      else if (typeof v !== 'number') return v;
    }
    if (notFinite) return 'not_finite';
    if (vals.length === 1) {
      out.value = vals[0] as number;
      out.dim = 1;
    } else {
      for (let k = 0; k < vals.length; k++) out.vector[k] = vals[k] as number;
      out.dim = vals.length;
    }
    return null;
  };

  const v = cfg.value;
  if (v.format === 'number') {
    return (r, out) => {
      const v = r.value; // once: a packed batch makes the text when asked
      if (v === null) return 'missing_field';
      if (tooLong(v, maxBytes)) return 'oversized';
      const text = asText(v);
      const tr = time.from === 'header' ? timeValue(headerText(r, time.name), time.unit, out) : recordTime(r, out);
      if (tr !== null) return tr;
      const sr = outerStream(r, out);
      if (sr !== null) return sr;
      const t = text.trim();
      if (t.length === 0) return 'missing_field';
      return setValues([parseTextNumber(t)], out);
    };
  }
  if (v.format === 'json') {
    const rawPaths = Array.isArray(v.path) ? v.path : [v.path];
    const paths = rawPaths.map(compilePath);
    const keyPath = key?.from === 'field' ? compilePath(key.path) : null;
    const timePath = time.from === 'field' ? compilePath(time.path) : null;
    const viaParse = (text: string, r: RawRecord, out: EventSlot): DecodeRejection | null => {
      let doc: unknown;
      try {
        doc = JSON.parse(text);
      } catch {
        return 'unparseable';
      }
      if (doc === null || typeof doc !== 'object') return 'unparseable';
      let tr: DecodeRejection | null;
      if (time.from === 'field') tr = timeValue(lookup(doc, timePath as string[]), time.unit, out);
      else if (time.from === 'header') tr = timeValue(headerText(r, time.name), time.unit, out);
      else tr = recordTime(r, out);
      if (tr !== null) return tr;
      const sr = keyPath !== null ? innerKey(lookup(doc, keyPath), out) : outerStream(r, out);
      if (sr !== null) return sr;
      return setValues(paths.map((p) => jsonNumber(lookup(doc, p))), out);
    };
    // Fast path (src/ingest/flat-json.ts) when every path is one top-level key: most messages are flat objects.
    const flat = [...paths, ...(keyPath ? [keyPath] : []), ...(timePath ? [timePath] : [])].every((p) => p.length === 1);
    if (!flat || options.fastPath === false) {
      return (r, out) => {
        const v = r.value; // once: a packed batch makes the text when asked
        if (v === null) return 'missing_field';
        if (tooLong(v, maxBytes)) return 'oversized';
        return viaParse(asText(v), r, out);
      };
    }
    const nv = paths.length;
    const keySlot = keyPath !== null ? nv : -1;
    const timeSlot = timePath !== null ? nv + (keyPath !== null ? 1 : 0) : -1;
    const scanner = new FlatJsonScanner([...rawPaths, ...(keyPath ? [keyPath[0]] : []), ...(timePath ? [timePath[0]] : [])]);
    // Stream names from a JSON field come through a table keyed by their bytes: no string per message.
    const fieldKeys = new KeyTable();
    const fieldValue = (bytes: Uint8Array, k: number): unknown => {
      const kind = scanner.kind[k];
      if (kind === FIELD_NUMBER) return scanner.num[k];
      if (kind === FIELD_STRING) {
        if (k !== keySlot) return utf8Text(bytes, scanner.start[k], scanner.end[k]);
        const key = fieldKeys.key(bytes, scanner.start[k], scanner.end[k]);
        return typeof key === 'string' ? key : key.toString('utf8');
      }
      if (kind === FIELD_NULL) return null;
      if (kind === FIELD_BOOLEAN) return true; // only its type matters: wrong_type
      return undefined;
    };
    return (r, out) => {
      // The value's bytes where they lie when the source offers them (RawRecord.valueBytes), else its own.
      let bytes: Uint8Array;
      let from = 0;
      let to: number;
      const vb = r.valueBytes;
      if (vb !== undefined && vb !== null) {
        bytes = vb;
        from = r.valueStart ?? 0;
        to = r.valueEnd ?? vb.length;
      } else {
        const v = r.value;
        if (v === null) return 'missing_field';
        bytes = typeof v === 'string' ? Buffer.from(v, 'utf8') : v;
        to = bytes.length;
      }
      if (to - from > maxBytes) return 'oversized';
      if (!scanner.scan(bytes, from, to)) return viaParse(utf8Text(bytes, from, to), r, out);
      let tr: DecodeRejection | null;
      if (timeSlot >= 0) {
        if (scanner.kind[timeSlot] === FIELD_NUMBER && time.from === 'field' && time.unit === 'ms') {
          const ms = scanner.num[timeSlot];
          if (!checkEpochMs(ms)) tr = 'bad_timestamp';
          else {
            out.ts = ms;
            tr = null;
          }
        } else tr = timeValue(fieldValue(bytes, timeSlot), (time as { unit: TimeUnit }).unit, out);
      } else if (time.from === 'header') tr = timeValue(headerText(r, time.name), time.unit, out);
      else tr = recordTime(r, out);
      if (tr !== null) return tr;
      const sr = keySlot >= 0 ? innerKey(fieldValue(bytes, keySlot), out) : outerStream(r, out);
      if (sr !== null) return sr;
      if (nv === 1) {
        const kind = scanner.kind[0];
        if (kind === FIELD_NUMBER) {
          const x = scanner.num[0];
          if (!Number.isFinite(x)) return 'not_finite';
          out.value = x;
          out.dim = 1;
          return null;
        }
        return kind === FIELD_ABSENT || kind === FIELD_NULL ? 'missing_field' : 'wrong_type';
      }
      const vals: (number | DecodeRejection)[] = [];
      for (let k = 0; k < nv; k++) vals.push(jsonNumber(fieldValue(bytes, k)));
      return setValues(vals, out);
    };
  }
  const cols = Array.isArray(v.column) ? v.column : [v.column];
  const delimiter = v.delimiter ?? ',';
  return (r, out) => {
    const v = r.value; // once: a packed batch makes the text when asked
    if (v === null) return 'missing_field';
    if (tooLong(v, maxBytes)) return 'oversized';
    let text = asText(v);
    // A message may carry its own line terminator.
    if (text.endsWith('\n')) text = text.slice(0, text.endsWith('\r\n') ? -2 : -1);
    const fields = splitCsvLine(text, delimiter);
    if (fields === null) return 'unparseable';
    const field = (c: number): string | undefined => fields[c];
    let tr: DecodeRejection | null;
    if (time.from === 'column') {
      const f = field(time.column);
      tr = timeValue(f === undefined || f.length === 0 ? undefined : f, time.unit, out);
    } else if (time.from === 'header') tr = timeValue(headerText(r, time.name), time.unit, out);
    else tr = recordTime(r, out);
    if (tr !== null) return tr;
    const sr = key?.from === 'column' ? innerKey(field(key.column), out) : outerStream(r, out);
    if (sr !== null) return sr;
    return setValues(
      cols.map((c) => {
        const f = field(c);
        return f === undefined || f.length === 0 ? 'missing_field' : parseTextNumber(f);
      }),
      out,
    );
  };
}
