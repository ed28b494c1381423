/**
 * Recorded stream files (or stdin, '-') as a Source for `modewatch replay`. Each input is one partition,
 * `file:<index>`; a record's offset is its 0-based line index. The format (NDJSON or CSV with a header) is told
 * from each file's first line unless given; a CSV header line is not handed out as a record.
 *
 * Files are read one after the other, in the order given (not merged by event time).
 *
 * Two ways in:
 *  - FileSource (the Source contract): batches of RawRecord, one string per line; decode with source.decode().
 *  - decodeFile(): the fastest path, no RawRecord at all: the decoder runs over the line reader's chunk text
 *    and calls back with one reused EventSlot.
 */
import { stat } from 'node:fs/promises';
import { EventSlot, type DecodeRejection } from './event.js';
import { readLineChunks, type LineReaderOptions } from './line-reader.js';
import { decoderForFirstLine, type RangeDecoder, type RecordFormat } from './records.js';
import { recordBatch, type RawRecord, type Source, type SourceHandlers } from './source.js';

export interface FileSourceOptions {
  /** Files to read; '-' is stdin. */
  paths: string[];
  /** Force a format instead of detecting it from the first line. */
  format?: RecordFormat;
  /** Records per batch (default 8192). */
  batchSize?: number;
  lineReader?: LineReaderOptions;
  /** Source name (default "file"). */
  name?: string;
}

/** Headers of a record that stands for an oversized line (its value is null). */
export const OVERSIZED_HEADERS: Readonly<Record<string, string>> = Object.freeze({ 'modewatch-oversized': '1' });
const NO_HEADERS: Readonly<Record<string, string>> = Object.freeze({});

export function partitionName(index: number): string {
  return `file:${index}`;
}

/** Checks that every path can be read, with a message naming the one that cannot. */
async function checkPaths(paths: string[]): Promise<void> {
  if (paths.length === 0) throw new Error('no input files given');
  if (paths.filter((p) => p === '-').length > 1) throw new Error("stdin ('-') can be given only once");
  for (const p of paths) {
    if (p === '-') continue;
    let s;
    try {
      s = await stat(p);
    } catch (e) {
      throw new Error(`cannot read input file ${p}: ${(e as NodeJS.ErrnoException).code ?? String(e)}`);
    }
    if (!s.isFile()) throw new Error(`input ${p} is not a regular file`);
  }
}

export interface FileStats {
  /** Lines read per partition (including a CSV header and skipped lines). */
  lines: Map<string, number>;
  oversized: number;
}

export class FileSource implements Source {
  readonly name: string;
  private readonly opts: FileSourceOptions;
  private readonly decoders = new Map<string, RangeDecoder>();
  private readonly committed = new Map<string, number>();
  private started = false;
  private stopping = false;
  private loop: Promise<FileStats> | null = null;

  constructor(options: FileSourceOptions) {
    this.opts = options;
    this.name = options.name ?? 'file';
  }

  async start(handlers: SourceHandlers): Promise<void> {
    await checkPaths(this.opts.paths);
    const partitions = this.opts.paths.map((_, i) => partitionName(i));
    const resume = await handlers.onAssigned(partitions);
    this.started = true;
    this.loop = this.run(handlers, resume);
    // Report a failure through onFatal as well as through finished().
    this.loop.catch((e: unknown) => handlers.onFatal(e instanceof Error ? e : new Error(String(e))));
  }

  /** Resolves once every input has been read and its last batch handled (or after stop()). */
  async finished(): Promise<FileStats> {
    if (this.loop === null) throw new Error('the file source has not been started');
    return this.loop;
  }

  private async run(handlers: SourceHandlers, resume: Map<string, number>): Promise<FileStats> {
    const batchSize = Math.max(1, this.opts.batchSize ?? 8192);
    const stats: FileStats = { lines: new Map(), oversized: 0 };
    for (let i = 0; i < this.opts.paths.length && !this.stopping; i++) {
      const path = this.opts.paths[i];
      const partition = partitionName(i);
      const from = resume.get(partition) ?? 0;
      let records: RawRecord[] = [];
      let lines = 0;
      let skipFirst = false;
      for await (const c of readLineChunks(path, this.opts.lineReader)) {
        for (let k = 0; k < c.count; k++) {
          const index = c.firstIndex + k;
          const s = c.starts[k];
          if (index === 0) {
            // An oversized first line cannot be a CSV header: the file is taken as NDJSON unless told otherwise.
            const d = decoderForFirstLine(s < 0 ? '' : c.text.slice(s, c.ends[k]), this.opts.format);
            this.decoders.set(partition, d.decoder);
            skipFirst = d.skipFirst;
            if (skipFirst) continue;
          }
          if (index < from) continue;
          if (s < 0) stats.oversized++;
          records.push({
            partition,
            offset: index,
            key: null,
            value: s < 0 ? null : c.text.slice(s, c.ends[k]),
            timestamp: 0,
            headers: s < 0 ? OVERSIZED_HEADERS : NO_HEADERS,
            topic: path,
          });
          if (records.length >= batchSize) {
            await handlers.onBatch(recordBatch(partition, records));
            records = [];
            if (this.stopping) break;
          }
        }
        lines += c.count;
        if (this.stopping) break;
      }
      if (records.length > 0) await handlers.onBatch(recordBatch(partition, records));
      stats.lines.set(partition, lines);
    }
    return stats;
  }

  /** Decodes a record this source produced (the decoder of its file's format). */
  decode(record: RawRecord, out: EventSlot): DecodeRejection | null {
    if (record.value === null) return record.headers === OVERSIZED_HEADERS ? 'oversized' : 'missing_field';
    const d = this.decoders.get(record.partition);
    if (d === undefined) throw new Error(`no decoder for partition ${record.partition}: the record is not from this source`);
    const text = typeof record.value === 'string' ? record.value : record.value.toString('utf8');
    out.partition = record.partition;
    out.offset = record.offset;
    return d.decode(text, 0, text.length, out);
  }

  async commit(positions: Map<string, number>): Promise<void> {
    for (const [p, o] of positions) this.committed.set(p, o);
  }

  /** Positions last committed (files have nowhere to store them; the checkpoint store does). */
  committedPositions(): Map<string, number> {
    return new Map(this.committed);
  }

  async stop(): Promise<void> {
    this.stopping = true;
    if (this.loop !== null) await this.loop.catch(() => undefined);
  }

  lag(): Map<string, number> {
    return new Map();
  }

  ready(): boolean {
    return this.started;
  }
}

export interface DecodeFileCounts {
  lines: number;
  accepted: number;
  rejected: number;
  format: RecordFormat | null;
}

/**
 * Reads and decodes one file without building records: onEvent gets the one reused slot (with partition and
 * offset set), onReject the reason and the line offset. Lines before `fromOffset` are skipped (resume).
 */
export async function decodeFile(
  path: string,
  partitionIndex: number,
  onEvent: (event: EventSlot) => void,
  onReject: (reason: DecodeRejection, offset: number) => void,
  options: {
    format?: RecordFormat;
    fromOffset?: number;
    lineReader?: LineReaderOptions;
    /** After each chunk: characters of whole lines read so far (bytes, for ASCII files), for a progress display. */
    onChunk?: (charsRead: number) => void;
  } = {},
): Promise<DecodeFileCounts> {
  await checkPaths([path]);
  const slot = new EventSlot();
  slot.partition = partitionName(partitionIndex);
  const from = options.fromOffset ?? 0;
  const counts: DecodeFileCounts = { lines: 0, accepted: 0, rejected: 0, format: null };
  let decoder: RangeDecoder | null = null;
  let chars = 0;
  for await (const c of readLineChunks(path, options.lineReader)) {
    let k = 0;
    if (decoder === null) {
      const s = c.starts[0];
      const d = decoderForFirstLine(s < 0 ? '' : c.text.slice(s, c.ends[0]), options.format);
      decoder = d.decoder;
      counts.format = d.format;
      if (d.skipFirst) k = 1;
    }
    const text = c.text;
    const base = c.firstIndex;
    for (; k < c.count; k++) {
      const index = base + k;
      if (index < from) continue;
      const s = c.starts[k];
      const r = s < 0 ? 'oversized' : decoder.decode(text, s, c.ends[k], slot);
      if (r === null) {
        slot.offset = index;
        counts.accepted++;
        onEvent(slot);
      } else {
        counts.rejected++;
        onReject(r, index);
      }
    }
    counts.lines += c.count;
    chars += c.text.length + c.count;
    options.onChunk?.(chars);
  }
  return counts;
}
