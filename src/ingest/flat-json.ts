/**
 * Reads a few top-level fields of a flat JSON object without JSON.parse: the shape most event messages have,
 * e.g. {"ts":1717171717000,"value":41.7,"endpoint":"/cart"}. Anything else (a nested object or array, an escape
 * in a key or in a wanted string, malformed text) makes scan() return false, and the caller parses the message
 * in full; so the scanner only has to be right on what it accepts, and a test checks it agrees with JSON.parse.
 * A key given twice keeps its last value, as JSON.parse does. No allocation per message.
 *
 * It reads the message's UTF-8 bytes where they lie (a range of a larger array), not a string: JSON's structure
 * is ASCII, a byte of a multi-byte character is never one of its delimiters, and bytes read several times faster
 * than a string's characters (30 against 145 ns for a 40-byte message, microbenchmark).
 */
import { lastNumberEnd, scanJsonNumberBytes } from './records.js';

/** What a wanted key held: absent, a number, a string (its UTF-8 bytes are bytes[start, end), no escapes), null, or true/false. */
export const FIELD_ABSENT = 0;
export const FIELD_NUMBER = 1;
export const FIELD_STRING = 2;
export const FIELD_NULL = 3;
export const FIELD_BOOLEAN = 4;

export class FlatJsonScanner {
  readonly kind: Uint8Array;
  readonly num: Float64Array;
  readonly start: Int32Array;
  readonly end: Int32Array;

  /** The wanted keys' UTF-8 bytes, flat, with where each starts: compared by hand. */
  private readonly codes: Uint8Array;
  private readonly at: Int32Array;

  constructor(private readonly keys: readonly string[]) {
    const encoded = keys.map((k) => Buffer.from(k, 'utf8'));
    this.codes = new Uint8Array(encoded.reduce((a, k) => a + k.length, 0));
    this.at = new Int32Array(keys.length + 1);
    let c = 0;
    encoded.forEach((k, i) => {
      this.at[i] = c;
      this.codes.set(k, c);
      c += k.length;
    });
    this.at[keys.length] = c;
    this.kind = new Uint8Array(keys.length);
    this.num = new Float64Array(keys.length);
    this.start = new Int32Array(keys.length);
    this.end = new Int32Array(keys.length);
  }

  /** Scan the message in s[from, to); true when it is a flat object this scanner read completely (results in kind/num/start/end). */
  scan(s: Uint8Array, from: number, to: number): boolean {
    const kind = this.kind;
    for (let k = 0; k < kind.length; k++) kind[k] = FIELD_ABSENT;
    const n = to;
    let i = skipWs(s, from, n);
    if (i >= n || s[i] !== 123 /* { */) return false;
    i = skipWs(s, i + 1, n);
    if (i < n && s[i] === 125 /* } */) return skipWs(s, i + 1, n) === n;
    for (;;) {
      if (i >= n || s[i] !== 34 /* " */) return false;
      const ks = i + 1;
      const ke = plainStringEnd(s, ks, n);
      if (ke < 0) return false;
      const slot = this.which(s, ks, ke);
      i = skipWs(s, ke + 1, n);
      if (i >= n || s[i] !== 58 /* : */) return false;
      i = skipWs(s, i + 1, n);
      const c = i < n ? s[i] : -1;
      if (c === 34) {
        const vs = i + 1;
        const ve = plainStringEnd(s, vs, n);
        if (ve < 0) return false;
        if (slot >= 0) {
          this.kind[slot] = FIELD_STRING;
          this.start[slot] = vs;
          this.end[slot] = ve;
        }
        i = ve + 1;
      } else if (c === 45 || (c >= 48 && c <= 57)) {
        const v = scanJsonNumberBytes(s, i, n);
        if (v !== v) return false;
        if (slot >= 0) {
          this.kind[slot] = FIELD_NUMBER;
          this.num[slot] = v;
        }
        i = lastNumberEnd();
      } else if (word(s, i, n, NULL)) {
        if (slot >= 0) this.kind[slot] = FIELD_NULL;
        i += 4;
      } else if (word(s, i, n, TRUE)) {
        if (slot >= 0) this.kind[slot] = FIELD_BOOLEAN;
        i += 4;
      } else if (word(s, i, n, FALSE)) {
        if (slot >= 0) this.kind[slot] = FIELD_BOOLEAN;
        i += 5;
      } else return false; // a nested object or array, or not JSON
      i = skipWs(s, i, n);
      const sep = i < n ? s[i] : -1;
      if (sep === 44 /* , */) {
        i = skipWs(s, i + 1, n);
        continue;
      }
      if (sep === 125) return skipWs(s, i + 1, n) === n;
      return false;
    }
  }

  private which(s: Uint8Array, a: number, b: number): number {
    const len = b - a;
    const at = this.at;
    const codes = this.codes;
    for (let k = 0; k < this.keys.length; k++) {
      const c0 = at[k];
      if (at[k + 1] - c0 !== len) continue;
      let j = 0;
      while (j < len && s[a + j] === codes[c0 + j]) j++;
      if (j === len) return k;
    }
    return -1;
  }
}

const NULL = [110, 117, 108, 108];
const TRUE = [116, 114, 117, 101];
const FALSE = [102, 97, 108, 115, 101];

/** Where the string whose text starts at s[i] ends (its closing quote), or -1 when it has an escape or a control
 *  character (JSON.parse decides those) or no end before n. */
function plainStringEnd(s: Uint8Array, i: number, n: number): number {
  for (; i < n; i++) {
    const c = s[i];
    if (c === 34 /* " */) return i;
    if (c === 92 /* \ */ || c < 32) return -1;
  }
  return -1;
}

/** Whether the ASCII word w starts at s[i] (within n). */
function word(s: Uint8Array, i: number, n: number, w: readonly number[]): boolean {
  if (i + w.length > n) return false;
  for (let j = 0; j < w.length; j++) if (s[i + j] !== w[j]) return false;
  return true;
}

function skipWs(s: Uint8Array, i: number, n: number): number {
  while (i < n) {
    const c = s[i];
    if (c !== 32 && c !== 9 && c !== 10 && c !== 13) break;
    i++;
  }
  return i;
}
