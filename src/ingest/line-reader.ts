/**
 * Reads a file or a byte stream (stdin) as lines, fast: large reads into one reused buffer, newlines found with
 * Buffer.lastIndexOf/String.indexOf, one string decoded per chunk of whole lines (not one per line). Lines are
 * handed out as ranges [start, end) of that chunk string, so a caller that decodes ranges allocates nothing per
 * line. "\r\n" and "\n" both end a line; a final line without a newline counts; a UTF-8 byte order mark at the
 * start is dropped; a line longer than `maxLineBytes` is reported as oversized (start -1) and never buffered whole.
 *
 * Chosen over a callback per line because the consumer's loop over a chunk is a plain synchronous loop (no call
 * through a closure per line) and the async step happens once per chunk (measured in src/bench/ingest-bench.ts).
 */
import { open, type FileHandle } from 'node:fs/promises';
import type { Readable } from 'node:stream';

export interface LineChunk {
  /** Text of the whole lines in this chunk. */
  text: string;
  /** Start of line k in `text`, or -1 when line k was oversized (its text is not kept). */
  starts: Int32Array;
  /** End of line k in `text` (exclusive, line terminator removed). */
  ends: Int32Array;
  /** Lines in this chunk (starts/ends may be longer; only [0, count) is valid). */
  count: number;
  /** 0-based index in the input of line 0 of this chunk (the record offset). */
  firstIndex: number;
}

export interface LineReaderOptions {
  /** Bytes read at a time. Default 1 MiB. */
  chunkBytes?: number;
  /** Longest line kept. Longer lines are reported as oversized. Default 1 MiB. */
  maxLineBytes?: number;
}

type ReadFn = (buf: Buffer, offset: number, length: number) => Promise<number>;

function streamReader(stream: Readable | NodeJS.ReadableStream): ReadFn {
  const it = (stream as AsyncIterable<Buffer | string>)[Symbol.asyncIterator]();
  let pending: Buffer | null = null;
  let pendingPos = 0;
  let done = false;
  return async (buf, offset, length) => {
    while (!done && (pending === null || pendingPos >= pending.length)) {
      const r = await it.next();
      if (r.done) done = true;
      else {
        pending = typeof r.value === 'string' ? Buffer.from(r.value, 'utf8') : r.value;
        pendingPos = 0;
      }
    }
    if (pending === null || pendingPos >= pending.length) return 0;
    const n = Math.min(length, pending.length - pendingPos);
    pending.copy(buf, offset, pendingPos, pendingPos + n);
    pendingPos += n;
    return n;
  };
}

/**
 * Yields chunks of lines from a file path ('-' for stdin) or a readable stream. The chunk object and its arrays
 * are reused: read what you need from a chunk before asking for the next one.
 */
export async function* readLineChunks(
  input: string | Readable | NodeJS.ReadableStream,
  options: LineReaderOptions = {},
): AsyncGenerator<LineChunk, void, void> {
  const chunkBytes = Math.max(16, options.chunkBytes ?? 1 << 20);
  const maxLineBytes = Math.max(1, options.maxLineBytes ?? 1 << 20);
  let fh: FileHandle | null = null;
  let read: ReadFn;
  if (typeof input === 'string' && input !== '-') {
    fh = await open(input, 'r');
    const h = fh;
    read = async (buf, offset, length) => (await h.read(buf, offset, length, null)).bytesRead;
  } else {
    read = streamReader(typeof input === 'string' ? process.stdin : input);
  }
  const buf = Buffer.allocUnsafe(chunkBytes + maxLineBytes + 1);
  const chunk: LineChunk = { text: '', starts: new Int32Array(4096), ends: new Int32Array(4096), count: 0, firstIndex: 0 };
  let carry = 0; // bytes of an unfinished line at buf[0, carry)
  let skipping = false; // inside an oversized line, discarding up to its newline
  let lineIndex = 0;
  let first = true;

  const push = (start: number, end: number): void => {
    if (chunk.count === chunk.starts.length) {
      const s = new Int32Array(chunk.starts.length * 2);
      s.set(chunk.starts);
      chunk.starts = s;
      const e = new Int32Array(chunk.ends.length * 2);
      e.set(chunk.ends);
      chunk.ends = e;
    }
    chunk.starts[chunk.count] = start;
    chunk.ends[chunk.count] = end;
    chunk.count++;
    lineIndex++;
  };
  const begin = (): void => {
    chunk.count = 0;
    chunk.firstIndex = lineIndex;
    chunk.text = '';
  };

  try {
    for (;;) {
      const n = await read(buf, carry, chunkBytes);
      const eof = n === 0;
      const filled = carry + n;
      let from = 0;
      if (first) {
        // Look at the first three bytes for a byte order mark before consuming anything.
        if (filled < 3 && !eof) {
          carry = filled;
          continue;
        }
        first = false;
        if (filled >= 3 && buf[0] === 0xef && buf[1] === 0xbb && buf[2] === 0xbf) from = 3;
      }
      begin();
      if (skipping) {
        const nl = buf.subarray(0, filled).indexOf(10);
        if (nl < 0) {
          carry = 0;
          if (eof) {
            push(-1, -1);
            yield chunk;
            return;
          }
          continue;
        }
        push(-1, -1);
        skipping = false;
        from = nl + 1;
      }
      const last = filled > from ? buf.lastIndexOf(10, filled - 1) : -1;
      if (last >= from) {
        const text = buf.toString('utf8', from, last);
        chunk.text = text;
        let i = 0;
        for (;;) {
          const j = text.indexOf('\n', i);
          const stop = j < 0 ? text.length : j;
          const end = stop > i && text.charCodeAt(stop - 1) === 13 ? stop - 1 : stop;
          // UTF-8 takes at most 3 bytes per UTF-16 unit: count bytes only for lines that might be too long.
          if (end - i > maxLineBytes / 3 && Buffer.byteLength(text.slice(i, end), 'utf8') > maxLineBytes) push(-1, -1);
          else push(i, end);
          if (j < 0) break;
          i = j + 1;
        }
        from = last + 1;
      }
      // Bytes after the last newline: an unfinished line.
      const rest = filled - from;
      if (eof) {
        if (rest > 0) {
          if (rest - (buf[filled - 1] === 13 ? 1 : 0) > maxLineBytes) push(-1, -1);
          else {
            // Append the final line to this chunk's text.
            const base = chunk.text.length + (chunk.count > 0 ? 1 : 0);
            let tail = buf.toString('utf8', from, filled);
            if (tail.charCodeAt(tail.length - 1) === 13) tail = tail.slice(0, -1);
            chunk.text = chunk.count > 0 ? chunk.text + '\n' + tail : tail;
            push(base, base + tail.length);
          }
        }
        if (chunk.count > 0) yield chunk;
        return;
      }
      // Too long already (one byte of slack: it may be the '\r' of a '\r\n' whose '\n' is still to come).
      if (rest > maxLineBytes + 1 || (rest === maxLineBytes + 1 && buf[filled - 1] !== 13)) {
        skipping = true;
        carry = 0;
      } else {
        if (from > 0 && rest > 0) buf.copy(buf, 0, from, filled);
        carry = rest;
      }
      if (chunk.count > 0) yield chunk;
    }
  } finally {
    if (fh !== null) await fh.close();
  }
}

export interface LineCounts {
  lines: number;
  oversized: number;
}

/**
 * Calls onLine(text, start, end, index) for every line; an oversized line comes with start = end = -1.
 * A convenience over readLineChunks.
 */
export async function forEachLine(
  input: string | Readable | NodeJS.ReadableStream,
  onLine: (text: string, start: number, end: number, index: number) => void,
  options: LineReaderOptions = {},
): Promise<LineCounts> {
  let lines = 0;
  let oversized = 0;
  for await (const c of readLineChunks(input, options)) {
    for (let k = 0; k < c.count; k++) {
      const s = c.starts[k];
      if (s < 0) oversized++;
      onLine(c.text, s, c.ends[k], c.firstIndex + k);
    }
    lines += c.count;
  }
  return { lines, oversized };
}
