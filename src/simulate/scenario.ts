/**
 * Scenario description: streams drawn from known subpopulations, with changes scheduled at event indices
 * (0-based, counted per stream). Also the validation of scenario files, with messages that name the key.
 */
import { FAMILIES, positiveSupport, type ComponentSpec, type MixtureSpec } from './families.js';

/** Kinds of malformed line the simulator writes, and what the NDJSON decoder is expected to say about each. */
export type BadLineKind = 'not_json' | 'nan_string' | 'missing_value' | 'wrong_type' | 'negative_value';
export const BAD_LINE_KINDS: readonly BadLineKind[] = ['not_json', 'nan_string', 'missing_value', 'wrong_type', 'negative_value'];
/** negative_value decodes fine; the model refuses it (a log-scale stream), counted as out_of_domain. */
export const BAD_LINE_EXPECTED: Record<BadLineKind, string> = {
  not_json: 'unparseable',
  nan_string: 'wrong_type',
  missing_value: 'missing_field',
  wrong_type: 'wrong_type',
  negative_value: 'out_of_domain',
};

export type ChangeSpec =
  /** A new component with this weight; the others are scaled by (1 - weight). */
  | { kind: 'appear'; at: number; component: ComponentSpec; weight: number }
  /** Remove component `component` (index in the current list); the rest are renormalised. */
  | { kind: 'vanish'; at: number; component: number }
  /** New weights for the current components (renormalised). */
  | { kind: 'weights'; at: number; weights: number[] }
  /** Set a component's location parameter to `to` at once. */
  | { kind: 'shift'; at: number; component: number; to: number }
  /** Move a component's location parameter linearly to `to` over `over` events. */
  | { kind: 'drift'; at: number; component: number; to: number; over: number }
  /** Events in [at, until) are, with probability `fraction`, drawn from `component` instead of the mixture. */
  | { kind: 'outliers'; at: number; until: number; fraction: number; component: ComponentSpec }
  /** Before events in [at, until), with probability `fraction`, an extra malformed line is written. */
  | { kind: 'badLines'; at: number; until: number; fraction: number; kinds?: BadLineKind[] };

export interface StreamSpec {
  name: string;
  /** Event time of the first event, epoch ms. */
  start: number;
  /** Events per second of event time. */
  rate: number;
  gaps: 'exponential' | 'fixed';
  /** Events in the stream (bad lines are extra). */
  count: number;
  initial: MixtureSpec;
  changes: ChangeSpec[];
  /** Significant digits written for values (default 7). */
  digits?: number;
}

export interface Scenario {
  name: string;
  description: string;
  streams: StreamSpec[];
}

// ---------------------------------------------------------------------------------------------------------------
// Validation

export class ScenarioError extends Error {}

type Obj = Record<string, unknown>;

function fail(where: string, msg: string): never {
  throw new ScenarioError(`${where}: ${msg}`);
}

function obj(v: unknown, where: string): Obj {
  if (typeof v !== 'object' || v === null || Array.isArray(v)) fail(where, 'expected a mapping');
  return v as Obj;
}

function onlyKeys(o: Obj, where: string, keys: string[]): void {
  for (const k of Object.keys(o)) if (!keys.includes(k)) fail(`${where}.${k}`, `unknown key (expected one of ${keys.join(', ')})`);
}

function num(o: Obj, key: string, where: string, check?: (x: number) => string | null): number {
  const v = o[key];
  if (v === undefined) fail(`${where}.${key}`, 'missing');
  if (typeof v !== 'number' || !Number.isFinite(v)) fail(`${where}.${key}`, `expected a finite number, got ${JSON.stringify(v)}`);
  const problem = check?.(v) ?? null;
  if (problem !== null) fail(`${where}.${key}`, `${problem}, got ${v}`);
  return v;
}

const positive = (x: number): string | null => (x > 0 ? null : 'must be > 0');
const fraction = (x: number): string | null => (x >= 0 && x <= 1 ? null : 'must be within [0, 1]');
const openFraction = (x: number): string | null => (x > 0 && x < 1 ? null : 'must be within (0, 1)');
const index = (x: number): string | null => (Number.isInteger(x) && x >= 0 ? null : 'must be an integer >= 0');

export function parseComponent(v: unknown, where: string): ComponentSpec {
  const o = obj(v, where);
  const f = o.family;
  if (typeof f !== 'string' || !(FAMILIES as readonly string[]).includes(f))
    fail(`${where}.family`, `expected one of ${FAMILIES.join(', ')}, got ${JSON.stringify(f)}`);
  switch (f) {
    case 'normal':
      onlyKeys(o, where, ['family', 'mean', 'sd']);
      return { family: 'normal', mean: num(o, 'mean', where), sd: num(o, 'sd', where, positive) };
    case 'lognormal':
      onlyKeys(o, where, ['family', 'meanlog', 'sdlog']);
      return { family: 'lognormal', meanlog: num(o, 'meanlog', where), sdlog: num(o, 'sdlog', where, positive) };
    case 'gamma':
      onlyKeys(o, where, ['family', 'shape', 'scale']);
      return { family: 'gamma', shape: num(o, 'shape', where, positive), scale: num(o, 'scale', where, positive) };
    default:
      onlyKeys(o, where, ['family', 'scale', 'shape']);
      return { family: 'pareto', scale: num(o, 'scale', where, positive), shape: num(o, 'shape', where, positive) };
  }
}

function weightsOf(v: unknown, where: string, n?: number): number[] {
  if (!Array.isArray(v)) fail(where, 'expected a list of weights');
  if (n !== undefined && v.length !== n) fail(where, `expected ${n} weights (one per current component), got ${v.length}`);
  if (v.length === 0) fail(where, 'expected at least one weight');
  const w = v.map((x, k) => {
    if (typeof x !== 'number' || !Number.isFinite(x) || x < 0) fail(`${where}[${k}]`, `expected a number >= 0, got ${JSON.stringify(x)}`);
    return x;
  });
  const s = w.reduce((a, b) => a + b, 0);
  if (!(s > 0)) fail(where, 'weights sum to 0');
  return w.map((x) => x / s);
}

export function parseMixture(v: unknown, where: string): MixtureSpec {
  const o = obj(v, where);
  onlyKeys(o, where, ['weights', 'components']);
  if (!Array.isArray(o.components) || o.components.length === 0) fail(`${where}.components`, 'expected a non-empty list');
  const components = o.components.map((c, k) => parseComponent(c, `${where}.components[${k}]`));
  const weights = weightsOf(o.weights, `${where}.weights`, components.length);
  return { weights, components };
}

function parseChange(v: unknown, where: string, count: number, nComponents: number, positiveStream: boolean): { change: ChangeSpec; nComponents: number } {
  const o = obj(v, where);
  const kind = o.kind;
  const at = num(o, 'at', where, index);
  if (at >= count) fail(`${where}.at`, `is beyond the stream's ${count} events`);
  const comp = (): number => {
    const c = num(o, 'component', where, index);
    if (c >= nComponents) fail(`${where}.component`, `no component ${c} at that point (the stream has ${nComponents}, indexed from 0)`);
    return c;
  };
  const range = (): number => {
    const until = num(o, 'until', where, index);
    if (until <= at) fail(`${where}.until`, `must be after at (${at})`);
    return until;
  };
  switch (kind) {
    case 'appear':
      onlyKeys(o, where, ['kind', 'at', 'component', 'weight']);
      return {
        change: { kind, at, component: parseComponent(o.component, `${where}.component`), weight: num(o, 'weight', where, openFraction) },
        nComponents: nComponents + 1,
      };
    case 'vanish': {
      onlyKeys(o, where, ['kind', 'at', 'component']);
      if (nComponents < 2) fail(where, 'cannot remove the only component');
      return { change: { kind, at, component: comp() }, nComponents: nComponents - 1 };
    }
    case 'weights':
      onlyKeys(o, where, ['kind', 'at', 'weights']);
      return { change: { kind, at, weights: weightsOf(o.weights, `${where}.weights`, nComponents) }, nComponents };
    case 'shift':
      onlyKeys(o, where, ['kind', 'at', 'component', 'to']);
      return { change: { kind, at, component: comp(), to: num(o, 'to', where) }, nComponents };
    case 'drift':
      onlyKeys(o, where, ['kind', 'at', 'component', 'to', 'over']);
      return {
        change: { kind, at, component: comp(), to: num(o, 'to', where), over: num(o, 'over', where, (x) => (Number.isInteger(x) && x >= 1 ? null : 'must be an integer >= 1')) },
        nComponents,
      };
    case 'outliers':
      onlyKeys(o, where, ['kind', 'at', 'until', 'fraction', 'component']);
      return {
        change: { kind, at, until: range(), fraction: num(o, 'fraction', where, fraction), component: parseComponent(o.component, `${where}.component`) },
        nComponents,
      };
    case 'badLines': {
      onlyKeys(o, where, ['kind', 'at', 'until', 'fraction', 'kinds']);
      let kinds: BadLineKind[] | undefined;
      if (o.kinds !== undefined) {
        if (!Array.isArray(o.kinds) || o.kinds.length === 0) fail(`${where}.kinds`, `expected a non-empty list of ${BAD_LINE_KINDS.join(', ')}`);
        kinds = o.kinds.map((k, i) => {
          if (typeof k !== 'string' || !(BAD_LINE_KINDS as readonly string[]).includes(k))
            fail(`${where}.kinds[${i}]`, `expected one of ${BAD_LINE_KINDS.join(', ')}, got ${JSON.stringify(k)}`);
          if (k === 'negative_value' && !positiveStream) fail(`${where}.kinds[${i}]`, 'negative_value needs a stream whose components are all positive (lognormal, gamma, pareto)');
          return k as BadLineKind;
        });
      }
      const c: ChangeSpec = { kind, at, until: range(), fraction: num(o, 'fraction', where, fraction) };
      if (kinds !== undefined) c.kinds = kinds;
      return { change: c, nComponents };
    }
    default:
      fail(`${where}.kind`, `expected one of appear, vanish, weights, shift, drift, outliers, badLines, got ${JSON.stringify(kind)}`);
  }
}

function parseStart(v: unknown, where: string): number {
  if (v === undefined) return DEFAULT_START;
  if (typeof v === 'number' && Number.isFinite(v)) return v;
  if (typeof v === 'string') {
    const t = Date.parse(v);
    if (Number.isFinite(t)) return t;
  }
  if (v instanceof Date) return v.getTime();
  fail(where, `expected epoch milliseconds or an RFC 3339 date-time, got ${JSON.stringify(v)}`);
}

/** 2024-01-01T00:00:00Z: an arbitrary start for invented scenarios. */
export const DEFAULT_START = Date.UTC(2024, 0, 1);

export function parseStream(v: unknown, where: string, countOverride?: number): StreamSpec {
  const o = obj(v, where);
  onlyKeys(o, where, ['name', 'start', 'rate', 'gaps', 'count', 'initial', 'changes', 'digits']);
  if (typeof o.name !== 'string' || o.name.length === 0) fail(`${where}.name`, 'expected a non-empty string');
  const gaps = o.gaps ?? 'exponential';
  if (gaps !== 'exponential' && gaps !== 'fixed') fail(`${where}.gaps`, `expected exponential or fixed, got ${JSON.stringify(gaps)}`);
  const count = countOverride ?? num(o, 'count', where, (x) => (Number.isInteger(x) && x >= 1 ? null : 'must be an integer >= 1'));
  const initial = parseMixture(o.initial, `${where}.initial`);
  const positiveStream = initial.components.every(positiveSupport);
  const changes: ChangeSpec[] = [];
  if (o.changes !== undefined) {
    if (!Array.isArray(o.changes)) fail(`${where}.changes`, 'expected a list');
    // Component indices refer to the list as it is when the change happens, so validate in time order.
    const order = o.changes.map((c, k) => ({ c, k, at: typeof (c as Obj)?.at === 'number' ? ((c as Obj).at as number) : 0 }));
    order.sort((a, b) => a.at - b.at || a.k - b.k);
    let n = initial.components.length;
    for (const { c, k } of order) {
      const r = parseChange(c, `${where}.changes[${k}]`, count, n, positiveStream);
      n = r.nComponents;
      changes.push(r.change);
    }
  }
  const s: StreamSpec = {
    name: o.name,
    start: parseStart(o.start, `${where}.start`),
    rate: num(o, 'rate', where, positive),
    gaps,
    count,
    initial,
    changes,
  };
  if (o.digits !== undefined) s.digits = num(o, 'digits', where, (x) => (Number.isInteger(x) && x >= 1 && x <= 17 ? null : 'must be an integer in 1..17'));
  return s;
}

/** Validates a parsed scenario file (JSON or YAML). `source` names the file in messages. */
export function parseScenario(v: unknown, source: string, countOverride?: number): Scenario {
  const o = obj(v, source);
  onlyKeys(o, source, ['name', 'description', 'streams']);
  if (!Array.isArray(o.streams) || o.streams.length === 0) fail(`${source}: streams`, 'expected a non-empty list');
  const streams = o.streams.map((s, k) => parseStream(s, `${source}: streams[${k}]`, countOverride));
  const names = new Set<string>();
  for (const [k, s] of streams.entries()) {
    if (names.has(s.name)) fail(`${source}: streams[${k}].name`, `duplicate stream name ${JSON.stringify(s.name)}`);
    names.add(s.name);
  }
  if (o.name !== undefined && typeof o.name !== 'string') fail(`${source}: name`, 'expected a string');
  if (o.description !== undefined && typeof o.description !== 'string') fail(`${source}: description`, 'expected a string');
  return { name: (o.name as string | undefined) ?? source, description: (o.description as string | undefined) ?? '', streams };
}
