import fc from 'fast-check';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Readable } from 'node:stream';
import { afterAll, describe, expect, it } from 'vitest';
import { EventSlot, type DecodeRejection } from '../src/ingest/event.js';
import { decodeFile, FileSource, OVERSIZED_HEADERS } from '../src/ingest/file-source.js';
import { forEachLine, readLineChunks, type LineReaderOptions } from '../src/ingest/line-reader.js';
import { copyRecords, type RawRecord, type RecordBatch } from '../src/ingest/source.js';

const dir = mkdtempSync(join(tmpdir(), 'modewatch-line-reader-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));
let fileNo = 0;
function file(content: string | Buffer): string {
  const p = join(dir, `f${fileNo++}.txt`);
  writeFileSync(p, content);
  return p;
}

/** Collects (text or null for oversized, index) from the reader. */
async function lines(input: string | Readable, opts: LineReaderOptions = {}): Promise<(string | null)[]> {
  const out: (string | null)[] = [];
  await forEachLine(
    input,
    (text, s, e, index) => {
      expect(index).toBe(out.length);
      out.push(s < 0 ? null : text.slice(s, e));
    },
    opts,
  );
  return out;
}

/** Reference split: \n ends a line, a trailing \r is dropped, a last line without \n counts, a final \n adds none. */
function reference(content: string, max: number): (string | null)[] {
  if (content.startsWith('\ufeff')) content = content.slice(1);
  if (content.length === 0) return [];
  const parts = content.split('\n');
  if (content.endsWith('\n')) parts.pop();
  return parts.map((l) => (l.endsWith('\r') ? l.slice(0, -1) : l)).map((l) => (Buffer.byteLength(l) > max ? null : l));
}

describe('line reader', () => {
  it('handles \\r\\n, empty lines, a final line without newline and a byte order mark', async () => {
    expect(await lines(file('a\r\nb\n\nc'))).toEqual(['a', 'b', '', 'c']);
    expect(await lines(file('\ufeffx\ny\n'))).toEqual(['x', 'y']);
    expect(await lines(file(''))).toEqual([]);
    expect(await lines(file('\n'))).toEqual(['']);
    expect(await lines(file('only'))).toEqual(['only']);
    expect(await lines(file('last\r'))).toEqual(['last']);
  });

  it('reports long lines as oversized without buffering them, keeping line indices', async () => {
    const long = 'x'.repeat(5000);
    const p = file(`a\n${long}\nb\n${long}`);
    expect(await lines(p, { chunkBytes: 64, maxLineBytes: 100 })).toEqual(['a', null, 'b', null]);
    expect(await lines(p, { chunkBytes: 1 << 16, maxLineBytes: 100 })).toEqual(['a', null, 'b', null]);
  });

  it('splits multi-byte UTF-8 correctly across chunk boundaries', async () => {
    const content = 'é中😀\n'.repeat(50) + 'end';
    for (const chunkBytes of [16, 17, 18, 19, 20]) {
      expect(await lines(file(content), { chunkBytes, maxLineBytes: 64 })).toEqual(reference(content, 64));
    }
  });

  it('gives the same lines as a plain split, for any content and chunking, from files and streams (fast-check)', async () => {
    const alphabet = fc.constantFrom('a', 'b', '\n', '\r', '\r\n', 'é', '😀', ' ', '{');
    await fc.assert(
      fc.asyncProperty(fc.array(alphabet, { maxLength: 200 }), fc.integer({ min: 16, max: 64 }), fc.integer({ min: 1, max: 40 }), fc.array(fc.integer({ min: 1, max: 30 }), { minLength: 1, maxLength: 10 }), async (parts, chunkBytes, maxLineBytes, cuts) => {
        const content = parts.join('');
        const expected = reference(content, maxLineBytes);
        expect(await lines(file(content), { chunkBytes, maxLineBytes })).toEqual(expected);
        // The same bytes as a stream delivered in uneven pieces (as stdin may deliver them).
        const buf = Buffer.from(content);
        const pieces: Buffer[] = [];
        let at = 0;
        for (let k = 0; at < buf.length; k++) {
          const n = cuts[k % cuts.length];
          pieces.push(buf.subarray(at, at + n));
          at += n;
        }
        expect(await lines(Readable.from(pieces), { chunkBytes, maxLineBytes })).toEqual(expected);
      }),
      { numRuns: 150, seed: 11 },
    );
  });

  it('hands out chunks whose firstIndex and count tile the input', async () => {
    const n = 10_000;
    const p = file(Array.from({ length: n }, (_, i) => `line ${i}`).join('\n'));
    let next = 0;
    let chunks = 0;
    for await (const c of readLineChunks(p, { chunkBytes: 4096 })) {
      expect(c.firstIndex).toBe(next);
      expect(c.text.slice(c.starts[0], c.ends[0])).toBe(`line ${next}`);
      next += c.count;
      chunks++;
    }
    expect(next).toBe(n);
    expect(chunks).toBeGreaterThan(5);
  });
});

describe('file source', () => {
  const ndjson = ['{"ts":1,"stream":"a","value":1}', 'junk', '{"ts":2,"stream":"b","value":[1,2]}', '{"ts":3,"stream":"a","value":3}'].join('\n') + '\n';
  const csvText = 'ts,stream,value\n10,a,1\n11,b,2;3\n12,a,x\n';

  function collector(resume = new Map<string, number>()) {
    const batches: { partition: string; records: RawRecord[] }[] = [];
    const fatal: Error[] = [];
    return {
      batches,
      fatal,
      handlers: {
        onBatch: async (b: RecordBatch) => {
          batches.push({ partition: b.partition, records: copyRecords(b) });
        },
        onAssigned: async () => resume,
        onRevoked: async () => undefined,
        onFatal: (e: Error) => fatal.push(e),
      },
    };
  }

  it('delivers every line as a record with partition file:<i> and its line offset, skipping a CSV header', async () => {
    const src = new FileSource({ paths: [file(ndjson), file(csvText)], batchSize: 2 });
    const c = collector();
    await src.start(c.handlers);
    expect(src.ready()).toBe(true);
    const stats = await src.finished();
    const recs: RawRecord[] = c.batches.flatMap((b) => b.records);
    expect(recs.map((r) => `${r.partition}@${r.offset}`)).toEqual(['file:0@0', 'file:0@1', 'file:0@2', 'file:0@3', 'file:1@1', 'file:1@2', 'file:1@3']);
    expect(stats.lines.get('file:1')).toBe(4);
    const slot = new EventSlot();
    const results = recs.map((r) => src.decode(r, slot));
    expect(results).toEqual([null, 'unparseable', null, null, null, null, 'wrong_type']);
    expect(c.fatal).toEqual([]);
  });

  it('resumes from the offsets the handler returns', async () => {
    const src = new FileSource({ paths: [file(ndjson)] });
    const c = collector(new Map([['file:0', 2]]));
    await src.start(c.handlers);
    await src.finished();
    expect(c.batches.flatMap((b) => b.records).map((r) => r.offset)).toEqual([2, 3]);
  });

  it('marks oversized lines and names a missing file', async () => {
    const src = new FileSource({ paths: [file(`{"ts":1,"stream":"a","value":1}\n${'9'.repeat(500)}\n`)], lineReader: { maxLineBytes: 100, chunkBytes: 64 } });
    const c = collector();
    await src.start(c.handlers);
    await src.finished();
    const recs = c.batches.flatMap((b) => b.records);
    expect(recs[1].headers).toBe(OVERSIZED_HEADERS);
    expect(src.decode(recs[1], new EventSlot())).toBe('oversized');
    await expect(new FileSource({ paths: [join(dir, 'nope.ndjson')] }).start(collector().handlers)).rejects.toThrow(/cannot read input file .*nope\.ndjson: ENOENT/);
  });

  it('a file whose first line is garbage or oversized is read as NDJSON, the line counted as rejected', async () => {
    const rejects: [DecodeRejection, number][] = [];
    let accepted = 0;
    const p = file(`${'x'.repeat(300)}\nhello\n{"ts":1,"stream":"a","value":1}\n`);
    const counts = await decodeFile(p, 0, () => accepted++, (r, o) => rejects.push([r, o]), { lineReader: { maxLineBytes: 100 } });
    expect(rejects).toEqual([
      ['oversized', 0],
      ['unparseable', 1],
    ]);
    expect(accepted).toBe(1);
    expect(counts.format).toBe('ndjson');
  });

  it('decodeFile gives the same events and rejections as the record path', async () => {
    const p = file(csvText);
    const events: string[] = [];
    const rejects: [DecodeRejection, number][] = [];
    const counts = await decodeFile(p, 3, (e) => events.push(`${e.partition}@${e.offset}:${e.stream}:${e.dim === 1 ? e.value : Array.from(e.vector.subarray(0, e.dim)).join(';')}`), (r, o) => rejects.push([r, o]));
    expect(events).toEqual(['file:3@1:a:1', 'file:3@2:b:2;3']);
    expect(rejects).toEqual([['wrong_type', 3]]);
    expect(counts).toMatchObject({ lines: 4, accepted: 2, rejected: 1, format: 'csv' });
  });
});
