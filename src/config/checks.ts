/**
 * Small typed readers over the parsed YAML: each takes a mapping, a key and the key's path, returns the value
 * typed (or the default), and records a problem naming the path when the value is wrong. They never throw, so
 * one pass finds every problem in the file.
 */
import { closestKey, type PathSeg, type ProblemList } from './problems.js';

export type Obj = Record<string, unknown>;

export function isObj(v: unknown): v is Obj {
  return typeof v === 'object' && v !== null && !Array.isArray(v) && !(v instanceof Uint8Array);
}

/** A value for a message: short, and never more than 60 characters of it. */
export function show(v: unknown): string {
  if (v === null || v === undefined) return 'nothing';
  if (Array.isArray(v)) return 'a list';
  if (isObj(v)) return 'a mapping';
  const s = typeof v === 'string' ? JSON.stringify(v) : String(v);
  return s.length > 60 ? `${s.slice(0, 57)}...` : s;
}

/** A YAML `key:` with no value is null; both mean "not given" except where null has a meaning of its own. */
export function absent(v: unknown): v is null | undefined {
  return v === undefined || v === null;
}

/**
 * A mapping with only the known keys. Unknown keys are problems placed on the key, with the closest known key
 * suggested; `refused` gives keys with a message of their own (e.g. an inline password: say why).
 * Returns null (after a problem) when the value is not a mapping; an absent value is an empty mapping.
 */
export function mapping(
  ps: ProblemList,
  v: unknown,
  path: PathSeg[],
  known: readonly string[],
  refused: Record<string, string> = {},
): Obj | null {
  if (absent(v)) return {};
  if (!isObj(v)) {
    ps.add(path, `must be a mapping (key: value lines), got ${show(v)}`);
    return null;
  }
  for (const k of Object.keys(v)) {
    if (known.includes(k)) continue;
    if (k in refused) {
      ps.add([...path, k], refused[k], true);
      continue;
    }
    const near = closestKey(k, known);
    ps.add(
      [...path, k],
      near !== null ? `unknown key (did you mean "${near}"?)` : `unknown key (known here: ${known.join(', ')})`,
      true,
    );
  }
  return v;
}

export function str(ps: ProblemList, o: Obj, key: string, base: PathSeg[], def?: string): string | undefined {
  const v = o[key];
  if (absent(v)) {
    if (def === undefined) ps.add([...base, key], 'required: a non-empty string');
    return def;
  }
  if (typeof v !== 'string' || v.length === 0) {
    ps.add([...base, key], `must be a non-empty string, got ${show(v)}`);
    return undefined;
  }
  return v;
}

/** An optional string: null when absent. */
export function optStr(ps: ProblemList, o: Obj, key: string, base: PathSeg[]): string | null | undefined {
  if (absent(o[key])) return null;
  return str(ps, o, key, base);
}

export function bool(ps: ProblemList, o: Obj, key: string, base: PathSeg[], def: boolean): boolean {
  const v = o[key];
  if (absent(v)) return def;
  if (typeof v !== 'boolean') {
    ps.add([...base, key], `must be true or false, got ${show(v)}`);
    return def;
  }
  return v;
}

export function int(ps: ProblemList, o: Obj, key: string, base: PathSeg[], def: number, min: number, max: number): number {
  const v = o[key];
  if (absent(v)) return def;
  if (typeof v !== 'number' || !Number.isInteger(v) || v < min || v > max) {
    ps.add([...base, key], `must be a whole number from ${min} to ${max}, got ${show(v)}`);
    return def;
  }
  return v;
}

/** A number in (min, max] (openMin) or [min, max]. */
export function num(ps: ProblemList, o: Obj, key: string, base: PathSeg[], def: number, min: number, max: number, openMin: boolean): number {
  const v = o[key];
  if (absent(v)) return def;
  if (typeof v !== 'number' || !Number.isFinite(v) || (openMin ? v <= min : v < min) || v > max) {
    ps.add([...base, key], `must be a number ${openMin ? '>' : '>='} ${min} and <= ${max}, got ${show(v)}`);
    return def;
  }
  return v;
}

export function oneOf<T extends string>(ps: ProblemList, o: Obj, key: string, base: PathSeg[], choices: readonly T[], def?: T): T | undefined {
  const v = o[key];
  if (absent(v)) {
    if (def === undefined) ps.add([...base, key], `required: one of ${choices.join(', ')}`);
    return def;
  }
  if (typeof v !== 'string' || !(choices as readonly string[]).includes(v)) {
    const near = typeof v === 'string' ? closestKey(v, choices) : null;
    ps.add([...base, key], `must be one of ${choices.join(', ')}, got ${show(v)}${near !== null ? ` (did you mean ${near}?)` : ''}`);
    return undefined;
  }
  return v as T;
}

/** A list; absent gives `def` (or a "required" problem when def is undefined). Null after a problem. */
export function list(ps: ProblemList, o: Obj, key: string, base: PathSeg[], def?: unknown[]): unknown[] | null {
  const v = o[key];
  if (absent(v)) {
    if (def === undefined) {
      ps.add([...base, key], 'required: a list');
      return null;
    }
    return def;
  }
  if (!Array.isArray(v)) {
    ps.add([...base, key], `must be a list, got ${show(v)}`);
    return null;
  }
  return v;
}

/** host:port or [ipv6]:port, port in [minPort, 65535]. */
export function parseHostPort(s: string, minPort: number): { host: string; port: number } | string {
  const m = /^\[([0-9A-Fa-f:.]+)\]:(\d{1,5})$/.exec(s) ?? /^([^\s:[\]/]+):(\d{1,5})$/.exec(s);
  if (!m) return `must be host:port (IPv6 as [addr]:port), got ${show(s)}`;
  const port = Number(m[2]);
  if (port < minPort || port > 65535) return `port must be from ${minPort} to 65535, got ${port}`;
  return { host: m[1] as string, port };
}

/** An http or https URL. The message does not repeat the value: a URL may carry credentials. */
export function httpUrlProblem(v: unknown): string | null {
  if (typeof v !== 'string' || v.length === 0) return `must be an http or https URL, got ${typeof v === 'string' ? 'an empty string' : show(v)}`;
  let u: URL;
  try {
    u = new URL(v);
  } catch {
    return 'is not a valid URL';
  }
  if (u.protocol !== 'http:' && u.protocol !== 'https:') return `must be an http or https URL, got a ${u.protocol} URL`;
  return null;
}

/** Kafka's rule for topic names: 1 to 249 of [A-Za-z0-9._-] (from memory of Kafka's Topic.validate). */
export const TOPIC_NAME = /^[A-Za-z0-9._-]{1,249}$/;

export function topicName(ps: ProblemList, o: Obj, key: string, base: PathSeg[], def?: string): string | undefined {
  const v = str(ps, o, key, base, def);
  if (v === undefined) return undefined;
  if (!TOPIC_NAME.test(v)) {
    ps.add([...base, key], `must be a Kafka topic name (1 to 249 of letters, digits, '.', '_', '-'), got ${show(v)}`);
    return undefined;
  }
  return v;
}
