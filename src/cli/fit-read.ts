/**
 * Reads the columns `modewatch fit` models from a CSV file (header row, RFC 4180 quoting) or an NDJSON file (one
 * JSON object per line; a column is a field name, dotted paths such as `timing.total_ms` reach nested fields).
 *
 * Every problem names the line (1-based, as an editor shows it) and the reason. By default the first bad line
 * stops the read with a FitInputError; with `skipInvalid` bad lines are left out and counted by reason, and the
 * counts travel with the data so the command can print them. Blank lines are counted too, never hidden.
 */
import { stat } from 'node:fs/promises';
import { readLineChunks } from '../ingest/line-reader.js';
import { parseTextNumber, splitCsvLine } from '../ingest/records.js';
import { UsageError } from './usage-error.js';

/** A mistake in the user's input or flags: the CLI prints the message and exits with code 2. */
export class FitInputError extends UsageError {
  readonly exitCode = 2;
  constructor(message: string) {
    super(message);
    this.name = 'FitInputError';
  }
}

export type InputFormat = 'csv' | 'ndjson';

/** Reasons a line is left out; the first three are "unreadable", the last two concern the value. */
export type SkipReason = 'broken_line' | 'wrong_field_count' | 'missing_field' | 'not_a_number' | 'not_finite' | 'out_of_domain';

export const SKIP_REASON_TEXT: Record<SkipReason, string> = {
  broken_line: 'unreadable line',
  wrong_field_count: 'wrong number of fields',
  missing_field: 'field missing',
  not_a_number: 'value is not a number',
  not_finite: 'value is not finite',
  out_of_domain: "value outside the scale's domain",
};

export interface SkipTally {
  total: number;
  byReason: Partial<Record<SkipReason, { count: number; firstLine: number; example: string }>>;
}

export interface ReadOptions {
  /** Column (CSV header name) or field (NDJSON, dotted path) names; empty = the file's only column. */
  columns: readonly string[];
  format?: InputFormat | 'auto';
  skipInvalid?: boolean;
  /** Called now and then with (bytesDone, bytesTotal) while reading. */
  onProgress?: (bytesDone: number) => void;
  /** Longest line accepted, bytes. Default 1 MiB. */
  maxLineBytes?: number;
}

export interface DataTable {
  file: string;
  format: InputFormat;
  columns: string[];
  d: number;
  n: number;
  /** Row-major n·d values. */
  data: Float64Array;
  /** 1-based line number of each row (for messages about values found later, e.g. outside a scale's domain). */
  lineOf: Float64Array;
  /** Physical lines in the file, header included. */
  lines: number;
  blankLines: number;
  skipped: SkipTally;
}

export function newSkipTally(): SkipTally {
  return { total: 0, byReason: {} };
}

export function tallySkip(t: SkipTally, reason: SkipReason, line: number, example: string): void {
  t.total++;
  const r = t.byReason[reason];
  if (r === undefined) t.byReason[reason] = { count: 1, firstLine: line, example };
  else r.count++;
}

export function detectFormat(file: string, firstLine: string): InputFormat {
  if (/\.csv$/i.test(file)) return 'csv';
  if (/\.(ndjson|jsonl|json)$/i.test(file)) return 'ndjson';
  return firstLine.trimStart().startsWith('{') ? 'ndjson' : 'csv';
}

/** Reads and validates; throws FitInputError for every user mistake. */
export async function readDataTable(file: string, options: ReadOptions): Promise<DataTable> {
  let size: number;
  try {
    const st = await stat(file);
    if (st.isDirectory()) throw new FitInputError(`${file} is a directory, not a data file`);
    size = st.size;
  } catch (e) {
    if (e instanceof FitInputError) throw e;
    throw new FitInputError(`cannot read ${file}: ${describeFsError(e)}`);
  }
  if (size === 0) throw new FitInputError(`${file} is empty (0 bytes): nothing to fit`);

  const skipInvalid = options.skipInvalid === true;
  const maxLineBytes = options.maxLineBytes ?? 1 << 20;
  let reader: RowReader | null = null;
  let format: InputFormat | null = options.format === 'csv' || options.format === 'ndjson' ? options.format : null;
  const skipped = newSkipTally();
  let lines = 0;
  let blankLines = 0;
  let bytes = 0;
  let cap = 1024;
  let d = 0;
  let data = new Float64Array(0);
  let lineOf = new Float64Array(0);
  let n = 0;
  let row = new Float64Array(0);

  const fail = (line: number, reason: SkipReason, message: string, example: string): void => {
    if (!skipInvalid) throw new FitInputError(`${file}, line ${line}: ${message}${reason === 'out_of_domain' ? '' : skipHint}`);
    tallySkip(skipped, reason, line, example);
  };

  try {
    for await (const c of readLineChunks(file, { maxLineBytes })) {
      for (let i = 0; i < c.count; i++) {
        const lineNo = c.firstIndex + i + 1;
        lines = lineNo;
        const s = c.starts[i];
        if (s < 0) {
          fail(lineNo, 'broken_line', `line is longer than ${maxLineBytes} bytes`, '(oversized)');
          continue;
        }
        const text = c.text.slice(s, c.ends[i]);
        if (text.trim() === '') {
          blankLines++;
          continue;
        }
        if (reader === null) {
          format ??= detectFormat(file, text);
          reader = format === 'csv' ? new CsvRows(file, text, options.columns) : new NdjsonRows(file, text, lineNo, options.columns);
          d = reader.columns.length;
          data = new Float64Array(cap * d);
          lineOf = new Float64Array(cap);
          row = new Float64Array(d);
          if (format === 'csv') continue; // the header is not data
        }
        const problem = reader.read(text, row);
        if (problem !== null) {
          fail(lineNo, problem.reason, problem.message, text.length > 80 ? text.slice(0, 77) + '...' : text);
          continue;
        }
        if (n === cap) {
          cap *= 2;
          const nd = new Float64Array(cap * d);
          nd.set(data);
          data = nd;
          const nl = new Float64Array(cap);
          nl.set(lineOf);
          lineOf = nl;
        }
        data.set(row, n * d);
        lineOf[n] = lineNo;
        n++;
      }
      // Chunk text is UTF-16 units; for the ASCII that number files hold that equals bytes (plus one per newline).
      bytes += c.text.length + c.count;
      options.onProgress?.(Math.min(bytes, size));
    }
  } catch (e) {
    if (e instanceof FitInputError) throw e;
    throw new FitInputError(`cannot read ${file}: ${describeFsError(e)}`);
  }
  if (reader === null) throw new FitInputError(`${file} holds only blank lines: nothing to fit`);
  if (n === 0) {
    const why = skipped.total > 0 ? `all ${skipped.total} data lines were skipped as invalid` : format === 'csv' ? 'it has a header row but no data rows' : 'no records';
    throw new FitInputError(`${file}: no rows to fit (${why})`);
  }
  return {
    file,
    format: format as InputFormat,
    columns: reader.columns,
    d,
    n,
    data: data.subarray(0, n * d),
    lineOf: lineOf.subarray(0, n),
    lines,
    blankLines,
    skipped,
  };
}

const skipHint = ' (fix the line, or pass --skip-invalid to leave such lines out; they are counted in the output)';

function describeFsError(e: unknown): string {
  const err = e as NodeJS.ErrnoException;
  if (err.code === 'ENOENT') return 'no such file';
  if (err.code === 'EACCES') return 'permission denied';
  if (err.code === 'EISDIR') return 'it is a directory';
  return err.code ?? err.message ?? String(e);
}

interface RowProblem {
  reason: SkipReason;
  message: string;
}

interface RowReader {
  readonly columns: string[];
  /** Fills row with the line's values, or says what is wrong. */
  read(line: string, row: Float64Array): RowProblem | null;
}

function describeValueProblem(column: string, raw: string, r: 'not_finite' | string): RowProblem {
  const shown = JSON.stringify(raw.length > 40 ? raw.slice(0, 37) + '...' : raw);
  if (r === 'not_finite') return { reason: 'not_finite', message: `${column} = ${shown} is not a finite number` };
  return { reason: 'not_a_number', message: `${column} = ${shown} is not a number` };
}

class CsvRows implements RowReader {
  readonly columns: string[];
  private readonly index: number[];
  private readonly fieldCount: number;

  constructor(
    private readonly file: string,
    header: string,
    wanted: readonly string[],
  ) {
    const fields = splitCsvLine(header.charCodeAt(0) === 0xfeff ? header.slice(1) : header);
    if (fields === null) throw new FitInputError(`${file}, line 1: the CSV header has broken quoting`);
    const names = fields.map((f) => f.trim());
    this.fieldCount = names.length;
    const list = names.map((x) => JSON.stringify(x)).join(', ');
    let use = [...wanted];
    if (use.length === 0) {
      if (names.length !== 1) throw new FitInputError(`${file}: say which column to fit with --column NAME (columns: ${list})`);
      use = [names[0]];
    }
    this.index = use.map((w) => {
      const k = names.indexOf(w);
      if (k < 0) throw new FitInputError(`${file}: no column named ${JSON.stringify(w)}; the header has ${list}`);
      if (names.indexOf(w, k + 1) >= 0) throw new FitInputError(`${file}: column ${JSON.stringify(w)} appears twice in the header`);
      return k;
    });
    this.columns = use;
  }

  read(line: string, row: Float64Array): RowProblem | null {
    const fields = splitCsvLine(line);
    if (fields === null) return { reason: 'broken_line', message: 'broken CSV quoting' };
    if (fields.length !== this.fieldCount)
      return { reason: 'wrong_field_count', message: `${fields.length} fields, the header has ${this.fieldCount}` };
    for (let j = 0; j < this.index.length; j++) {
      const raw = fields[this.index[j]];
      const v = raw.trim() === '' ? 'empty' : parseTextNumber(raw);
      if (typeof v !== 'number') return describeValueProblem(this.columns[j], raw, v);
      row[j] = v;
    }
    return null;
  }
}

type Json = null | boolean | number | string | Json[] | { [key: string]: Json };

/** Field at a dotted path; a key that itself contains dots is found first. */
function getPath(obj: { [key: string]: Json }, path: string): Json | undefined {
  if (Object.hasOwn(obj, path)) return obj[path];
  let cur: Json | undefined = obj;
  for (const part of path.split('.')) {
    if (cur === null || typeof cur !== 'object' || Array.isArray(cur) || !Object.hasOwn(cur, part)) return undefined;
    cur = cur[part];
  }
  return cur;
}

/** Dotted paths of every leaf, for messages that list what exists. */
function leafPaths(obj: Json, prefix = '', out: string[] = []): string[] {
  if (obj !== null && typeof obj === 'object' && !Array.isArray(obj)) {
    for (const [k, v] of Object.entries(obj)) leafPaths(v, prefix === '' ? k : `${prefix}.${k}`, out);
  } else if (prefix !== '') out.push(prefix);
  return out;
}

type Parsed = { ok: true; obj: { [key: string]: Json } } | { ok: false; problem: RowProblem };

function parseObject(line: string): Parsed {
  let v: Json;
  try {
    v = JSON.parse(line) as Json;
  } catch (e) {
    return { ok: false, problem: { reason: 'broken_line', message: `not valid JSON (${(e as Error).message})` } };
  }
  if (v === null || typeof v !== 'object' || Array.isArray(v)) {
    const found = v === null ? 'null' : Array.isArray(v) ? 'an array' : `a ${typeof v}`;
    return { ok: false, problem: { reason: 'broken_line', message: `expected a JSON object, found ${found}` } };
  }
  return { ok: true, obj: v };
}

class NdjsonRows implements RowReader {
  readonly columns: string[];

  constructor(file: string, firstLine: string, firstLineNo: number, wanted: readonly string[]) {
    const first = parseObject(firstLine);
    if (!first.ok)
      throw new FitInputError(`${file}, line ${firstLineNo}: ${first.problem.message}; the first record must be readable to find the fields`);
    const obj = first.obj;
    const paths = leafPaths(obj);
    const shown = paths.slice(0, 40).map((p) => JSON.stringify(p)).join(', ') + (paths.length > 40 ? `, … (${paths.length} in all)` : '');
    let use = [...wanted];
    if (use.length === 0) {
      const numeric = paths.filter((p) => typeof getPath(obj, p) === 'number');
      if (numeric.length !== 1) throw new FitInputError(`${file}: say which field to fit with --column NAME (fields on line ${firstLineNo}: ${shown})`);
      use = numeric;
    }
    for (const w of use) {
      if (getPath(obj, w) === undefined)
        throw new FitInputError(`${file}: no field named ${JSON.stringify(w)} on line ${firstLineNo}, the first record; its fields are ${shown}`);
    }
    this.columns = use;
  }

  read(line: string, row: Float64Array): RowProblem | null {
    const parsed = parseObject(line);
    if (!parsed.ok) return parsed.problem;
    const obj = parsed.obj;
    for (let j = 0; j < this.columns.length; j++) {
      const name = this.columns[j];
      const v = getPath(obj, name);
      if (v === undefined) return { reason: 'missing_field', message: `no field ${JSON.stringify(name)}` };
      if (typeof v === 'number') {
        // JSON.parse turns 1e999 into Infinity.
        if (!Number.isFinite(v)) return describeValueProblem(name, String(v), 'not_finite');
        row[j] = v;
      } else if (typeof v === 'string') {
        // Numbers written as strings ("12.5") are accepted: many loggers quote them.
        const x = v.trim() === '' ? 'empty' : parseTextNumber(v);
        if (typeof x !== 'number') return describeValueProblem(name, v, x);
        row[j] = x;
      } else {
        return { reason: 'not_a_number', message: `${name} is ${v === null ? 'null' : Array.isArray(v) ? 'an array' : `a ${typeof v}`}, not a number` };
      }
    }
    return null;
  }
}
