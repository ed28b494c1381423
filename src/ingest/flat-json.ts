/**
 * Reads a few top-level fields of a flat JSON object without JSON.parse: the shape most event messages have,
 * e.g. {"ts":1717171717000,"value":41.7,"endpoint":"/cart"}. Anything else (a nested object or array, an escape
 * in a key or in a wanted string, malformed text) makes scan() return false, and the caller parses the message
 * in full; so the scanner only has to be right on what it accepts, and a test checks it agrees with JSON.parse.
 * A key given twice keeps its last value, as JSON.parse does. No allocation per message.
 */
import { lastNumberEnd, scanJsonNumber } from './records.js';

/** What a wanted key held: absent, a number, a string (its text is text.slice(start, end)), null, or true/false. */
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

  /** The wanted keys' UTF-16 code units, flat, with where each starts: compared by hand, which is cheaper than
   *  a startsWith call per key per field. */
  private readonly codes: Uint16Array;
  private readonly at: Int32Array;

  constructor(private readonly keys: readonly string[]) {
    this.codes = new Uint16Array(keys.reduce((a, k) => a + k.length, 0));
    this.at = new Int32Array(keys.length + 1);
    let c = 0;
    keys.forEach((k, i) => {
      this.at[i] = c;
      for (let j = 0; j < k.length; j++) this.codes[c++] = k.charCodeAt(j);
    });
    this.at[keys.length] = c;
    this.kind = new Uint8Array(keys.length);
    this.num = new Float64Array(keys.length);
    this.start = new Int32Array(keys.length);
    this.end = new Int32Array(keys.length);
  }

  /** Scan s; true when it is a flat object this scanner read completely (results in kind/num/start/end). */
  scan(s: string): boolean {
    const kind = this.kind;
    for (let k = 0; k < kind.length; k++) kind[k] = FIELD_ABSENT;
    const n = s.length;
    let i = skipWs(s, 0, n);
    if (s.charCodeAt(i) !== 123 /* { */) return false;
    i = skipWs(s, i + 1, n);
    if (s.charCodeAt(i) === 125 /* } */) return skipWs(s, i + 1, n) === n;
    for (;;) {
      if (s.charCodeAt(i) !== 34 /* " */) return false;
      const ks = i + 1;
      let ke = ks;
      for (;;) {
        if (ke >= n) return false;
        const c = s.charCodeAt(ke);
        if (c === 34) break;
        if (c === 92 /* \ */ || c < 32) return false;
        ke++;
      }
      const slot = this.which(s, ks, ke);
      i = skipWs(s, ke + 1, n);
      if (s.charCodeAt(i) !== 58 /* : */) return false;
      i = skipWs(s, i + 1, n);
      const c = s.charCodeAt(i);
      if (c === 34) {
        const vs = i + 1;
        let ve = vs;
        for (;;) {
          if (ve >= n) return false;
          const d = s.charCodeAt(ve);
          if (d === 34) break;
          if (d === 92 || d < 32) return false;
          ve++;
        }
        if (slot >= 0) {
          this.kind[slot] = FIELD_STRING;
          this.start[slot] = vs;
          this.end[slot] = ve;
        }
        i = ve + 1;
      } else if (c === 45 || (c >= 48 && c <= 57)) {
        const v = scanJsonNumber(s, i, n);
        if (v !== v) return false;
        if (slot >= 0) {
          this.kind[slot] = FIELD_NUMBER;
          this.num[slot] = v;
        }
        i = lastNumberEnd();
      } else if (s.startsWith('null', i)) {
        if (slot >= 0) this.kind[slot] = FIELD_NULL;
        i += 4;
      } else if (s.startsWith('true', i)) {
        if (slot >= 0) this.kind[slot] = FIELD_BOOLEAN;
        i += 4;
      } else if (s.startsWith('false', i)) {
        if (slot >= 0) this.kind[slot] = FIELD_BOOLEAN;
        i += 5;
      } else return false; // a nested object or array, or not JSON
      i = skipWs(s, i, n);
      const sep = s.charCodeAt(i);
      if (sep === 44 /* , */) {
        i = skipWs(s, i + 1, n);
        continue;
      }
      if (sep === 125) return skipWs(s, i + 1, n) === n;
      return false;
    }
  }

  private which(s: string, a: number, b: number): number {
    const len = b - a;
    const at = this.at;
    const codes = this.codes;
    for (let k = 0; k < this.keys.length; k++) {
      const c0 = at[k];
      if (at[k + 1] - c0 !== len) continue;
      let j = 0;
      while (j < len && s.charCodeAt(a + j) === codes[c0 + j]) j++;
      if (j === len) return k;
    }
    return -1;
  }
}

function skipWs(s: string, i: number, n: number): number {
  while (i < n) {
    const c = s.charCodeAt(i);
    if (c !== 32 && c !== 9 && c !== 10 && c !== 13) break;
    i++;
  }
  return i;
}
