/**
 * Keys met again and again (Kafka message keys, stream names in a JSON field), found by a hash of their bytes
 * (FNV-1a, 32 bits) and a byte comparison, so that a key that repeats is neither decoded nor interned again: it
 * comes back as the same string (text when its bytes are valid UTF-8, which decoders treat as they treat the
 * bytes), or as bytes. Bounded: cleared when full.
 */
import { isUtf8 } from 'node:buffer';

export class KeyTable {
  /** A key and, unless it is ASCII text (whose characters are its bytes), a copy of its bytes to compare with. */
  private readonly byHash = new Map<number, { key: string | Buffer; bytes: Uint8Array | null }>();

  constructor(private readonly capacity = 100_000) {}

  key(bytes: Uint8Array, start: number, end: number): string | Buffer {
    let h = 0x811c9dc5;
    for (let j = start; j < end; j++) h = Math.imul(h ^ bytes[j], 0x01000193);
    const hit = this.byHash.get(h);
    if (hit !== undefined && sameKey(hit, bytes, start, end)) return hit.key;
    const own = bytes.slice(start, end);
    const buf = Buffer.from(own.buffer, own.byteOffset, own.byteLength);
    const text = buf.toString('utf8');
    // Decoding replaces bytes that are not UTF-8 with U+FFFD; such a key stays bytes.
    const key = text.includes('\uFFFD') && !isUtf8(buf) ? buf : text;
    if (hit === undefined) {
      if (this.byHash.size >= this.capacity) this.byHash.clear();
      // Valid UTF-8 decodes to as many characters as bytes only when every byte is ASCII.
      this.byHash.set(h, { key, bytes: typeof key === 'string' && key.length === own.length ? null : own });
    }
    return key;
  }
}

function sameKey(e: { key: string | Buffer; bytes: Uint8Array | null }, b: Uint8Array, start: number, end: number): boolean {
  const n = end - start;
  if (e.bytes === null) {
    const t = e.key as string;
    if (t.length !== n) return false;
    for (let j = 0; j < n; j++) if (t.charCodeAt(j) !== b[start + j]) return false;
    return true;
  }
  const a = e.bytes;
  if (a.length !== n) return false;
  for (let j = 0; j < n; j++) if (a[j] !== b[start + j]) return false;
  return true;
}
