/**
 * Decoding of recorded stream files for `modewatch replay`.
 *
 * NDJSON, one record a line:  {"ts": <epoch ms | RFC 3339 string>, "stream": "<name>", "value": <number | [numbers]>}
 * CSV with a header naming the columns ts, stream, value (any order; RFC 4180 quoting); a vector value is written
 * as numbers separated by ';' inside the value field.
 *
 * Speed: replay must reach a million records a second, so the common NDJSON shape (exactly the keys ts, stream,
 * value in that order, no whitespace, no escapes) is scanned by hand over a range of a larger string, without
 * JSON.parse and without allocating. Anything else falls back to JSON.parse, which is the authority: the fast path
 * only ever answers when it is sure to give the same answer (property-tested).
 *
 * Rejection order when several things are wrong (both paths): unparseable, then ts (missing_field, wrong_type,
 * bad_timestamp), then stream (missing_stream, wrong_type), then value (missing_field, wrong_type,
 * wrong_dimension, not_finite). A field that is null counts as missing.
 */
import { EventSlot, MAX_DIM, MAX_EPOCH_MS, type DecodeRejection } from './event.js';

// ---------------------------------------------------------------------------------------------------------------
// Numbers

const POW10 = [1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22];

/** Index just after the last number scanned by scanJsonNumber. */
let numEnd = 0;

/** Where the last number scanJsonNumber read ended (for scanners outside this file). */
export function lastNumberEnd(): number {
  return numEnd;
}

/**
 * Scans a JSON number (RFC 8259 section 6 grammar) starting at i, not beyond end. Returns its value and sets
 * numEnd, or returns NaN when the text is not a JSON number there. Exact: the value is m * 10^e computed with
 * one correctly rounded operation when m < 2^53 and |e| <= 22 (Clinger 1990, "How to read floating point numbers
 * accurately"), else it defers to Number() on the substring.
 */
export function scanJsonNumber(s: string, i: number, end: number): number {
  const start = i;
  let neg = false;
  let c = i < end ? s.charCodeAt(i) : -1;
  if (c === 45 /* - */) {
    neg = true;
    i++;
    c = i < end ? s.charCodeAt(i) : -1;
  }
  let m = 0;
  let digits = 0;
  let exp10 = 0;
  if (c === 48 /* 0 */) {
    i++;
    c = i < end ? s.charCodeAt(i) : -1;
  } else if (c >= 49 && c <= 57) {
    while (c >= 48 && c <= 57) {
      m = m * 10 + (c - 48);
      if (m !== 0) digits++;
      i++;
      c = i < end ? s.charCodeAt(i) : -1;
    }
  } else {
    return NaN;
  }
  if (c === 46 /* . */) {
    i++;
    c = i < end ? s.charCodeAt(i) : -1;
    if (!(c >= 48 && c <= 57)) return NaN;
    while (c >= 48 && c <= 57) {
      m = m * 10 + (c - 48);
      if (m !== 0) digits++;
      exp10--;
      i++;
      c = i < end ? s.charCodeAt(i) : -1;
    }
  }
  if (c === 101 || c === 69 /* e E */) {
    i++;
    c = i < end ? s.charCodeAt(i) : -1;
    let eneg = false;
    if (c === 43 || c === 45) {
      eneg = c === 45;
      i++;
      c = i < end ? s.charCodeAt(i) : -1;
    }
    if (!(c >= 48 && c <= 57)) return NaN;
    let e = 0;
    while (c >= 48 && c <= 57) {
      if (e < 100000) e = e * 10 + (c - 48);
      i++;
      c = i < end ? s.charCodeAt(i) : -1;
    }
    exp10 += eneg ? -e : e;
  }
  numEnd = i;
  // 15 significant digits always fit below 2^53 exactly.
  if (digits <= 15 && exp10 >= -22 && exp10 <= 22) {
    const v = exp10 < 0 ? m / POW10[-exp10] : m * POW10[exp10];
    return neg ? -v : v;
  }
  if (m === 0) return neg ? -0 : 0;
  return Number(s.slice(start, i));
}

/**
 * scanJsonNumber over bytes (UTF-8 or ASCII text in b[i, end)): the same grammar and the same exact result, for
 * decoders that read a message's bytes where they lie instead of making a string of them. Sets numEnd too.
 * (Two loops for one grammar: a character read through a shared accessor is several times slower in V8.)
 */
export function scanJsonNumberBytes(b: Uint8Array, i: number, end: number): number {
  const start = i;
  let neg = false;
  let c = i < end ? b[i] : -1;
  if (c === 45 /* - */) {
    neg = true;
    i++;
    c = i < end ? b[i] : -1;
  }
  let m = 0;
  let digits = 0;
  let exp10 = 0;
  if (c === 48 /* 0 */) {
    i++;
    c = i < end ? b[i] : -1;
  } else if (c >= 49 && c <= 57) {
    while (c >= 48 && c <= 57) {
      m = m * 10 + (c - 48);
      if (m !== 0) digits++;
      i++;
      c = i < end ? b[i] : -1;
    }
  } else {
    return NaN;
  }
  if (c === 46 /* . */) {
    i++;
    c = i < end ? b[i] : -1;
    if (!(c >= 48 && c <= 57)) return NaN;
    while (c >= 48 && c <= 57) {
      m = m * 10 + (c - 48);
      if (m !== 0) digits++;
      exp10--;
      i++;
      c = i < end ? b[i] : -1;
    }
  }
  if (c === 101 || c === 69 /* e E */) {
    i++;
    c = i < end ? b[i] : -1;
    let eneg = false;
    if (c === 43 || c === 45) {
      eneg = c === 45;
      i++;
      c = i < end ? b[i] : -1;
    }
    if (!(c >= 48 && c <= 57)) return NaN;
    let e = 0;
    while (c >= 48 && c <= 57) {
      if (e < 100000) e = e * 10 + (c - 48);
      i++;
      c = i < end ? b[i] : -1;
    }
    exp10 += eneg ? -e : e;
  }
  numEnd = i;
  if (digits <= 15 && exp10 >= -22 && exp10 <= 22) {
    const v = exp10 < 0 ? m / POW10[-exp10] : m * POW10[exp10];
    return neg ? -v : v;
  }
  if (m === 0) return neg ? -0 : 0;
  // The number's characters are ASCII: one code unit a byte.
  return Number(Buffer.from(b.buffer, b.byteOffset + start, i - start).toString('latin1'));
}

const CSV_NUMBER = /^[ \t]*[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?[ \t]*$/;
const CSV_NOT_FINITE = /^[ \t]*[+-]?(nan|inf|infinity)[ \t]*$/i;

// ---------------------------------------------------------------------------------------------------------------
// RFC 3339 timestamps

function digit(s: string, i: number): number {
  const c = s.charCodeAt(i) - 48;
  return c >= 0 && c <= 9 ? c : -1000000;
}

function twoDigits(s: string, i: number): number {
  return digit(s, i) * 10 + digit(s, i + 1);
}

/** Days since 1970-01-01 of a proleptic Gregorian date (Hinnant, "chrono-Compatible Low-Level Date Algorithms"). */
function daysFromCivil(y: number, m: number, d: number): number {
  y -= m <= 2 ? 1 : 0;
  const era = Math.floor(y / 400);
  const yoe = y - era * 400;
  const doy = Math.floor((153 * (m + (m > 2 ? -3 : 9)) + 2) / 5) + d - 1;
  const doe = yoe * 365 + Math.floor(yoe / 4) - Math.floor(yoe / 100) + doy;
  return era * 146097 + doe - 719468;
}

const DAYS_IN_MONTH = [0, 31, 29, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31];

/**
 * Parses an RFC 3339 date-time (section 5.6) in s[a, b): `YYYY-MM-DDTHH:MM:SS[.frac](Z|±HH:MM)`, with 't', 'z'
 * and a space for 'T' accepted (section 5.6 note). A leap second (:60) is counted as the next second.
 * Returns epoch milliseconds (a fraction below 1 ms is kept), or NaN.
 */
export function parseRfc3339(s: string, a: number, b: number): number {
  if (b - a < 20) return NaN;
  const year = digit(s, a) * 1000 + digit(s, a + 1) * 100 + digit(s, a + 2) * 10 + digit(s, a + 3);
  if (year < 0 || s.charCodeAt(a + 4) !== 45 || s.charCodeAt(a + 7) !== 45) return NaN;
  const month = twoDigits(s, a + 5);
  const day = twoDigits(s, a + 8);
  if (month < 1 || month > 12 || day < 1) return NaN;
  const leap = year % 4 === 0 && (year % 100 !== 0 || year % 400 === 0);
  if (day > (month === 2 && !leap ? 28 : DAYS_IN_MONTH[month])) return NaN;
  const sep = s.charCodeAt(a + 10);
  if (sep !== 84 && sep !== 116 && sep !== 32) return NaN;
  const hour = twoDigits(s, a + 11);
  const minute = twoDigits(s, a + 14);
  const second = twoDigits(s, a + 17);
  if (s.charCodeAt(a + 13) !== 58 || s.charCodeAt(a + 16) !== 58) return NaN;
  if (hour < 0 || hour > 23 || minute < 0 || minute > 59 || second < 0 || second > 60) return NaN;
  let i = a + 19;
  let frac = 0;
  if (s.charCodeAt(i) === 46) {
    i++;
    let scale = 100; // first fraction digit is hundreds of milliseconds
    const first = i;
    while (i < b) {
      const d = digit(s, i);
      if (d < 0) break;
      frac += d * scale;
      scale /= 10;
      i++;
    }
    if (i === first) return NaN;
  }
  if (i >= b) return NaN;
  let offsetMin = 0;
  const z = s.charCodeAt(i);
  if (z === 90 || z === 122) {
    i++;
  } else if (z === 43 || z === 45) {
    if (b - i < 6 || s.charCodeAt(i + 3) !== 58) return NaN;
    const oh = twoDigits(s, i + 1);
    const om = twoDigits(s, i + 4);
    if (oh < 0 || oh > 23 || om < 0 || om > 59) return NaN;
    offsetMin = (z === 45 ? -1 : 1) * (oh * 60 + om);
    i += 6;
  } else {
    return NaN;
  }
  if (i !== b) return NaN;
  const ms =
    daysFromCivil(year, month, day) * 86400000 + hour * 3600000 + (minute - offsetMin) * 60000 + second * 1000 + frac;
  return ms >= -MAX_EPOCH_MS && ms <= MAX_EPOCH_MS ? ms : NaN;
}

export function checkEpochMs(v: number): boolean {
  return v >= -MAX_EPOCH_MS && v <= MAX_EPOCH_MS; // false for NaN and infinities too
}

// ---------------------------------------------------------------------------------------------------------------
// Interning of stream names

/**
 * Maps a stream name, given as a range of a larger string, to one canonical string without allocating when the
 * name was seen before: open addressing on an FNV-1a hash, compared character by character. Bounded: when half
 * full, the table is cleared (names are then re-created once; correctness does not depend on hits).
 */
export class StreamInterner {
  private readonly table: (string | undefined)[];
  private readonly mask: number;
  private count = 0;

  constructor(capacity = 4096) {
    let size = 16;
    while (size < capacity * 2) size *= 2;
    this.table = new Array<string | undefined>(size).fill(undefined);
    this.mask = size - 1;
  }

  intern(s: string, a: number, b: number): string {
    let h = 0x811c9dc5;
    for (let i = a; i < b; i++) h = Math.imul(h ^ s.charCodeAt(i), 0x01000193);
    const len = b - a;
    let slot = h & this.mask;
    for (;;) {
      const e = this.table[slot];
      if (e === undefined) break;
      if (e.length === len) {
        let same = true;
        for (let k = 0; k < len; k++) {
          if (e.charCodeAt(k) !== s.charCodeAt(a + k)) {
            same = false;
            break;
          }
        }
        if (same) return e;
      }
      slot = (slot + 1) & this.mask;
    }
    if (this.count * 2 >= this.table.length) {
      this.table.fill(undefined);
      this.count = 0;
      slot = h & this.mask;
    }
    // Flatten so the canonical string does not keep the whole chunk it was sliced from alive.
    const name = a === 0 && b === s.length ? s : flatten(s.slice(a, b));
    this.table[slot] = name;
    this.count++;
    return name;
  }
}

/** A copy that does not share storage with its parent (V8 keeps sliced strings pointing into the parent). */
function flatten(s: string): string {
  return s.length > 12 ? s.split('').join('') : s;
}

// ---------------------------------------------------------------------------------------------------------------
// Shared field checks (both NDJSON paths and CSV use these, so they agree by construction)

function decodeJsonTs(ts: unknown, s: EventSlot): DecodeRejection | null {
  if (ts === undefined || ts === null) return 'missing_field';
  if (typeof ts === 'number') {
    if (!checkEpochMs(ts)) return 'bad_timestamp';
    s.ts = ts;
    return null;
  }
  if (typeof ts === 'string') {
    const v = parseRfc3339(ts, 0, ts.length);
    if (v !== v) return 'bad_timestamp';
    s.ts = v;
    return null;
  }
  return 'wrong_type';
}

function decodeJsonValue(v: unknown, s: EventSlot): DecodeRejection | null {
  if (v === undefined || v === null) return 'missing_field';
  if (typeof v === 'number') {
    if (!Number.isFinite(v)) return 'not_finite';
    s.value = v;
    s.dim = 1;
    return null;
  }
  if (Array.isArray(v)) {
    const n = v.length;
    for (let k = 0; k < n; k++) if (typeof v[k] !== 'number') return 'wrong_type';
    if (n === 0 || n > MAX_DIM) return 'wrong_dimension';
    for (let k = 0; k < n; k++) if (!Number.isFinite(v[k])) return 'not_finite';
    if (n === 1) {
      s.value = v[0] as number;
      s.dim = 1;
    } else {
      for (let k = 0; k < n; k++) s.vector[k] = v[k] as number;
      s.dim = n;
    }
    return null;
  }
  return 'wrong_type';
}

// ---------------------------------------------------------------------------------------------------------------
// NDJSON

const P_TS = '{"ts":';
const P_STREAM = ',"stream":"';
const P_VALUE = ',"value":';

function matchAt(s: string, i: number, end: number, lit: string): boolean {
  const n = lit.length;
  if (i + n > end) return false;
  for (let k = 0; k < n; k++) if (s.charCodeAt(i + k) !== lit.charCodeAt(k)) return false;
  return true;
}

/** Fast path answered "use the general path". */
const FALLBACK = 1;

export class NdjsonDecoder {
  private readonly interner: StreamInterner;
  /** How many lines took the JSON.parse path (for tuning and tests). */
  fallbacks = 0;

  constructor(interner = new StreamInterner()) {
    this.interner = interner;
  }

  /** Decodes the line s[start, end) (no line terminator) into out. */
  decode(s: string, start: number, end: number, out: EventSlot): DecodeRejection | null {
    const r = this.fast(s, start, end, out);
    if (r !== FALLBACK) return r;
    this.fallbacks++;
    return this.general(start === 0 && end === s.length ? s : s.slice(start, end), out);
  }

  /** The JSON.parse path, authoritative for every input. */
  general(line: string, out: EventSlot): DecodeRejection | null {
    let o: unknown;
    try {
      o = JSON.parse(line);
    } catch {
      return 'unparseable';
    }
    if (typeof o !== 'object' || o === null || Array.isArray(o)) return 'unparseable';
    const rec = o as Record<string, unknown>;
    const tr = decodeJsonTs(rec.ts, out);
    if (tr !== null) return tr;
    const st = rec.stream;
    if (st === undefined || st === null || st === '') return 'missing_stream';
    if (typeof st !== 'string') return 'wrong_type';
    out.stream = this.interner.intern(st, 0, st.length);
    return decodeJsonValue(rec.value, out);
  }

  /** Hand scan of `{"ts":N|"S","stream":"S","value":N|[N,...]}`; FALLBACK on anything else. */
  private fast(s: string, i: number, end: number, out: EventSlot): DecodeRejection | null | typeof FALLBACK {
    if (!matchAt(s, i, end, P_TS)) return FALLBACK;
    i += P_TS.length;
    let reason: DecodeRejection | null = null;
    if (s.charCodeAt(i) === 34 /* " */) {
      const a = i + 1;
      let j = a;
      for (; j < end; j++) {
        const c = s.charCodeAt(j);
        if (c === 34) break;
        if (c === 92 || c < 32) return FALLBACK;
      }
      if (j >= end) return FALLBACK;
      const t = parseRfc3339(s, a, j);
      if (t !== t) reason = 'bad_timestamp';
      else out.ts = t;
      i = j + 1;
    } else {
      const t = scanJsonNumber(s, i, end);
      if (t !== t) return FALLBACK;
      i = numEnd;
      if (!checkEpochMs(t)) reason = 'bad_timestamp';
      else out.ts = t;
    }
    if (!matchAt(s, i, end, P_STREAM)) return FALLBACK;
    i += P_STREAM.length;
    const a = i;
    for (; i < end; i++) {
      const c = s.charCodeAt(i);
      if (c === 34) break;
      if (c === 92 || c < 32) return FALLBACK;
    }
    if (i >= end) return FALLBACK;
    const b = i;
    i++;
    if (!matchAt(s, i, end, P_VALUE)) return FALLBACK;
    i += P_VALUE.length;
    if (s.charCodeAt(i) === 91 /* [ */) {
      i++;
      let n = 0;
      let finite = true;
      if (s.charCodeAt(i) === 93) return FALLBACK; // [] : rare, let the general path say it
      for (;;) {
        const v = scanJsonNumber(s, i, end);
        if (v !== v) return FALLBACK;
        i = numEnd;
        if (n < MAX_DIM) out.vector[n] = v;
        if (!Number.isFinite(v)) finite = false;
        n++;
        const c = s.charCodeAt(i);
        if (c === 44) {
          i++;
          continue;
        }
        if (c === 93) {
          i++;
          break;
        }
        return FALLBACK;
      }
      if (i !== end - 1 || s.charCodeAt(i) !== 125 /* } */) return FALLBACK;
      if (reason !== null) return reason;
      if (a === b) return 'missing_stream';
      if (n > MAX_DIM) return 'wrong_dimension';
      if (!finite) return 'not_finite';
      out.stream = this.interner.intern(s, a, b);
      if (n === 1) {
        out.value = out.vector[0];
        out.dim = 1;
      } else {
        out.dim = n;
      }
      return null;
    }
    const v = scanJsonNumber(s, i, end);
    if (v !== v) return FALLBACK;
    i = numEnd;
    if (i !== end - 1 || s.charCodeAt(i) !== 125) return FALLBACK;
    if (reason !== null) return reason;
    if (a === b) return 'missing_stream';
    if (!Number.isFinite(v)) return 'not_finite';
    out.stream = this.interner.intern(s, a, b);
    out.value = v;
    out.dim = 1;
    return null;
  }
}

const defaultNdjson = new NdjsonDecoder();

/** Decodes one NDJSON line (without its terminator) into out; null when accepted. */
export function decodeNdjsonLine(line: string, out: EventSlot): DecodeRejection | null {
  return defaultNdjson.decode(line, 0, line.length, out);
}

/** The JSON.parse path only (the reference the fast path is tested against). */
export function decodeNdjsonLineGeneral(line: string, out: EventSlot): DecodeRejection | null {
  return defaultNdjson.general(line, out);
}

// ---------------------------------------------------------------------------------------------------------------
// CSV

/** Splits one CSV record per RFC 4180 (quoted fields, "" for a quote). Returns null when the quoting is broken. */
export function splitCsvLine(line: string, delimiter = ','): string[] | null {
  const fields: string[] = [];
  const d = delimiter.charCodeAt(0);
  let i = 0;
  const n = line.length;
  for (;;) {
    if (i < n && line.charCodeAt(i) === 34) {
      let v = '';
      i++;
      for (;;) {
        const q = line.indexOf('"', i);
        if (q < 0) return null;
        v += line.slice(i, q);
        if (line.charCodeAt(q + 1) === 34) {
          v += '"';
          i = q + 2;
          continue;
        }
        i = q + 1;
        break;
      }
      fields.push(v);
      if (i === n) return fields;
      if (line.charCodeAt(i) !== d) return null;
      i++;
    } else {
      const j = line.indexOf(delimiter, i);
      const f = j < 0 ? line.slice(i) : line.slice(i, j);
      if (f.includes('"')) return null;
      fields.push(f);
      if (j < 0) return fields;
      i = j + 1;
    }
  }
}

/**
 * A number written as text (a CSV field, a plain-text Kafka value): JSON number grammar, or with a leading '+',
 * a bare '.5'/'5.', and spaces or tabs around it. NaN/Infinity spelled out -> not_finite; anything else wrong_type.
 */
export function parseTextNumber(s: string, a = 0, b = s.length): number | DecodeRejection {
  return decodeCsvNumber(s, a, b);
}

function decodeCsvNumber(s: string, a: number, b: number): number | DecodeRejection {
  const v = scanJsonNumber(s, a, b);
  if (v === v && numEnd === b) return Number.isFinite(v) ? v : 'not_finite';
  const f = s.slice(a, b);
  if (CSV_NUMBER.test(f)) {
    const x = Number(f);
    return Number.isFinite(x) ? x : 'not_finite';
  }
  if (CSV_NOT_FINITE.test(f)) return 'not_finite';
  return 'wrong_type';
}

/** Column layout read from a CSV header. */
export interface CsvLayout {
  ts: number;
  stream: number;
  value: number;
  columns: number;
  delimiter: string;
}

/** Reads the header line; throws an Error naming what is missing. */
export function parseCsvHeader(header: string, delimiter = ','): CsvLayout {
  const h = header.charCodeAt(0) === 0xfeff ? header.slice(1) : header;
  const fields = splitCsvLine(h, delimiter);
  if (fields === null) throw new Error(`CSV header: broken quoting in ${JSON.stringify(header.slice(0, 80))}`);
  const names = fields.map((f) => f.trim().toLowerCase());
  const find = (name: string): number => {
    const k = names.indexOf(name);
    if (k < 0) throw new Error(`CSV header: no column named "${name}" (header is ${JSON.stringify(h.slice(0, 80))}; expected ts,stream,value)`);
    if (names.indexOf(name, k + 1) >= 0) throw new Error(`CSV header: column "${name}" appears twice`);
    return k;
  };
  return { ts: find('ts'), stream: find('stream'), value: find('value'), columns: fields.length, delimiter };
}

const DEFAULT_LAYOUT: CsvLayout = { ts: 0, stream: 1, value: 2, columns: 3, delimiter: ',' };

export class CsvDecoder {
  private readonly layout: CsvLayout;
  private readonly interner: StreamInterner;
  private readonly starts: Int32Array;
  private readonly ends: Int32Array;
  fallbacks = 0;

  constructor(layout: CsvLayout = DEFAULT_LAYOUT, interner = new StreamInterner()) {
    if (layout.delimiter.length !== 1 || layout.delimiter === '"' || layout.delimiter === ';')
      throw new Error(`CSV delimiter must be one character other than '"' and ';' (got ${JSON.stringify(layout.delimiter)})`);
    this.layout = layout;
    this.interner = interner;
    this.starts = new Int32Array(layout.columns);
    this.ends = new Int32Array(layout.columns);
  }

  decode(s: string, start: number, end: number, out: EventSlot): DecodeRejection | null {
    // Fast path: no quotes, so fields are the ranges between delimiters.
    const q = s.indexOf('"', start);
    if (q < 0 || q >= end) {
      const d = this.layout.delimiter.charCodeAt(0);
      let n = 0;
      let a = start;
      for (let i = start; i <= end; i++) {
        if (i === end || s.charCodeAt(i) === d) {
          if (n >= this.layout.columns) return 'unparseable';
          this.starts[n] = a;
          this.ends[n] = i;
          n++;
          a = i + 1;
        }
      }
      if (n < this.layout.columns) return 'missing_field';
      return this.fields(s, this.starts, this.ends, out);
    }
    this.fallbacks++;
    const fields = splitCsvLine(s.slice(start, end), this.layout.delimiter);
    if (fields === null) return 'unparseable';
    if (fields.length > this.layout.columns) return 'unparseable';
    if (fields.length < this.layout.columns) return 'missing_field';
    // Re-express the fields as ranges of one joined string so the same field code runs.
    let joined = '';
    for (let k = 0; k < fields.length; k++) {
      this.starts[k] = joined.length;
      joined += fields[k];
      this.ends[k] = joined.length;
    }
    return this.fields(joined, this.starts, this.ends, out);
  }

  private fields(s: string, st: Int32Array, en: Int32Array, out: EventSlot): DecodeRejection | null {
    const L = this.layout;
    // ts: epoch milliseconds or RFC 3339
    const ta = st[L.ts];
    const tb = en[L.ts];
    if (ta === tb) return 'missing_field';
    const tn = scanJsonNumber(s, ta, tb);
    if (tn === tn && numEnd === tb) {
      if (!checkEpochMs(tn)) return 'bad_timestamp';
      out.ts = tn;
    } else {
      const t = parseRfc3339(s, ta, tb);
      if (t !== t) return 'bad_timestamp';
      out.ts = t;
    }
    const sa = st[L.stream];
    const sb = en[L.stream];
    if (sa === sb) return 'missing_stream';
    const va = st[L.value];
    const vb = en[L.value];
    if (va === vb) return 'missing_field';
    const semi = s.indexOf(';', va);
    if (semi < 0 || semi >= vb) {
      const v = decodeCsvNumber(s, va, vb);
      if (typeof v !== 'number') return v;
      out.value = v;
      out.dim = 1;
    } else {
      let n = 0;
      let a = va;
      let finite = true;
      for (let i = va; i <= vb; i++) {
        if (i === vb || s.charCodeAt(i) === 59) {
          if (a === i) return 'wrong_type';
          const v = decodeCsvNumber(s, a, i);
          if (v === 'wrong_type') return v;
          if (typeof v !== 'number') finite = false;
          else if (n < MAX_DIM) out.vector[n] = v;
          n++;
          a = i + 1;
        }
      }
      if (n > MAX_DIM) return 'wrong_dimension';
      if (!finite) return 'not_finite';
      out.dim = n;
    }
    out.stream = this.interner.intern(s, sa, sb);
    return null;
  }
}

const defaultCsv = new CsvDecoder();

/** Decodes one CSV data line in the default layout ts,stream,value. */
export function decodeCsvLine(line: string, out: EventSlot): DecodeRejection | null {
  return defaultCsv.decode(line, 0, line.length, out);
}

export type RecordFormat = 'ndjson' | 'csv';

/** Guesses the format from a file's first line: '{' starts NDJSON, a header naming ts/stream/value is CSV. */
export function detectFormat(firstLine: string): RecordFormat | null {
  const l = (firstLine.charCodeAt(0) === 0xfeff ? firstLine.slice(1) : firstLine).trimStart();
  if (l.startsWith('{')) return 'ndjson';
  try {
    parseCsvHeader(l);
    return 'csv';
  } catch {
    return null;
  }
}

/** A decoder over ranges of a larger string, for the line reader's chunks. */
export interface RangeDecoder {
  decode(s: string, start: number, end: number, out: EventSlot): DecodeRejection | null;
}

/**
 * The decoder for a file whose first line is `firstLine`. For CSV the first line is the header and must not be
 * decoded as data (`skipFirst` says so). A first line that is neither an object nor a CSV header is taken as a
 * malformed NDJSON record (it is then counted as unparseable, not fatal).
 */
export function decoderForFirstLine(firstLine: string, format?: RecordFormat): { decoder: RangeDecoder; skipFirst: boolean; format: RecordFormat } {
  const f = format ?? detectFormat(firstLine) ?? 'ndjson';
  if (f === 'csv') return { decoder: new CsvDecoder(parseCsvHeader(firstLine)), skipFirst: true, format: f };
  return { decoder: new NdjsonDecoder(), skipFirst: false, format: f };
}
