/**
 * Problems found while loading a configuration: each names the key path (`kafka.topics[1].decoding.value.path`)
 * and, when the value came from the file, the line and column the yaml library reports for it. Values that came
 * from the environment or a flag say so instead of pointing into the file.
 */
import { isMap, isPair, isScalar, isSeq, type Document, type LineCounter, type Node } from 'yaml';

export type PathSeg = string | number;

export interface LoadProblem {
  /** Key path, e.g. `kafka.topics[1].decoding.value.path`; '' for the file as a whole. */
  path: string;
  message: string;
  /** 1-based, when the problem points into the file. */
  line?: number;
  column?: number;
}

/** `a.b[1].c` from segments. */
export function formatPath(path: readonly PathSeg[]): string {
  let s = '';
  for (const seg of path) {
    if (typeof seg === 'number') s += `[${seg}]`;
    else s += s === '' ? seg : `.${seg}`;
  }
  return s;
}

/** Inverse of formatPath for the key strings other rooms report (`known[0].weight`, `decoding.value.path`). */
export function parsePath(path: string): PathSeg[] {
  const out: PathSeg[] = [];
  for (const m of path.matchAll(/([^.[\]]+)|\[(\d+)\]/g)) out.push(m[2] !== undefined ? Number(m[2]) : (m[1] as string));
  return out;
}

/** `FILE:LINE:COL: key.path: message` (without LINE:COL when the problem has no place in the file). */
export function formatProblem(file: string, p: LoadProblem): string {
  const where = p.line !== undefined ? `${file}:${p.line}:${p.column ?? 1}` : file;
  return p.path === '' ? `${where}: ${p.message}` : `${where}: ${p.path}: ${p.message}`;
}

/** Levenshtein distance (insert, delete, substitute: cost 1 each). */
export function editDistance(a: string, b: string): number {
  let prev = Array.from({ length: b.length + 1 }, (_, j) => j);
  for (let i = 1; i <= a.length; i++) {
    const cur = [i];
    for (let j = 1; j <= b.length; j++) {
      cur[j] = Math.min(prev[j] + 1, cur[j - 1] + 1, prev[j - 1] + (a[i - 1] === b[j - 1] ? 0 : 1));
    }
    prev = cur;
  }
  return prev[b.length];
}

/** The known key closest to a typo, if it is close enough to be what was meant. */
export function closestKey(key: string, known: readonly string[]): string | null {
  let best: string | null = null;
  let bestD = Infinity;
  for (const k of known) {
    const d = k.toLowerCase() === key.toLowerCase() ? 0.5 : editDistance(key, k);
    if (d < bestD) {
      bestD = d;
      best = k;
    }
  }
  // Up to 2 edits, or a third one for long keys: close enough to be a typo, far enough not to guess wildly.
  const limit = key.length >= 8 ? 3 : key.length >= 4 ? 2 : 1;
  return best !== null && bestD <= limit ? best : null;
}

/**
 * Collects problems and places them in the file. Paths that were overridden from the environment or a flag are
 * reported with their origin and no file position.
 */
export class ProblemList {
  readonly items: LoadProblem[] = [];
  /** formatted path -> where its value came from (e.g. `environment variable MODEWATCH_HTTP_LISTEN`). */
  readonly origins = new Map<string, string>();

  constructor(
    private readonly doc: Document | null = null,
    private readonly lines: LineCounter | null = null,
  ) {}

  /** Adds a problem at `path`; `atKey` places it on the key rather than the value (unknown keys). */
  add(path: readonly PathSeg[], message: string, atKey = false): void {
    const p = formatPath(path);
    for (let n = path.length; n > 0; n--) {
      const origin = this.origins.get(formatPath(path.slice(0, n)));
      if (origin !== undefined) {
        this.items.push({ path: p, message: `${message} (value from ${origin})` });
        return;
      }
    }
    const pos = this.locate(path, atKey);
    this.items.push(pos ? { path: p, message, line: pos.line, column: pos.col } : { path: p, message });
  }

  /** Adds a problem at a path given as text (from validators in other rooms). */
  addText(path: string, message: string): void {
    this.add(parsePath(path), message);
  }

  get length(): number {
    return this.items.length;
  }

  /** Problems in file order; those without a place (environment, flags, missing file) last, in the order found. */
  sorted(): LoadProblem[] {
    return this.items
      .map((p, i) => ({ p, i }))
      .sort((a, b) => (a.p.line ?? Infinity) - (b.p.line ?? Infinity) || (a.p.column ?? 0) - (b.p.column ?? 0) || a.i - b.i)
      .map((x) => x.p);
  }

  /** Line and column of the deepest node of the path that exists in the file (its parent when the key is missing). */
  private locate(path: readonly PathSeg[], atKey: boolean): { line: number; col: number } | null {
    if (this.doc === null || this.lines === null) return null;
    let node: unknown = this.doc.contents;
    let range: readonly number[] | null | undefined = (node as Node | null)?.range;
    // A missing key is placed on the key of the mapping that lacks it (`kafka:`), not on that mapping's first entry.
    let parentKey: readonly number[] | null | undefined = null;
    for (let i = 0; i < path.length; i++) {
      const seg = path[i];
      const last = i === path.length - 1;
      if (isMap(node)) {
        const pair = node.items.find((it) => isPair(it) && isScalar(it.key) && String(it.key.value) === String(seg));
        if (!pair) {
          range = parentKey ?? range;
          break;
        }
        const key = pair.key as Node;
        parentKey = key.range;
        if (last && atKey) {
          range = key.range;
          break;
        }
        node = pair.value;
        const value = node as Node | null;
        // `key:` with no value has no range of its own: point at the key.
        range = value?.range ?? key.range;
        if (!value) break;
      } else if (isSeq(node) && typeof seg === 'number') {
        const item = node.items[seg] as Node | undefined;
        if (!item) break;
        node = item;
        range = item.range;
        parentKey = item.range;
      } else break;
    }
    if (!range) return null;
    const { line, col } = this.lines.linePos(range[0]);
    return { line, col };
  }
}
