/**
 * The per-stream model metrics, written straight into the Prometheus text exposition format
 * (0.0.4) from the registry at scrape time, as bytes into reused per-family buffers. Not through
 * prom-client: with tens of thousands of streams a scrape has 100k+ series, and prom-client's
 * per-label-set objects and hashing cost several times more (src/bench/scrape-bench.ts measures
 * the ratio).
 *
 * - Each family is written as one group (HELP, TYPE, then all its samples), as the format and
 *   `promtool check metrics` require; empty families are left out.
 * - Location and spread go to the family of the stream's base unit (metric-names.ts): a stream
 *   in milliseconds is converted to `_seconds`, kilobytes to `_bytes`; a stream without a unit,
 *   or with a unit that has no base-unit mapping, goes to the bare family in its own units.
 * - The `component` label is the component's stable id, so a series follows one component for its
 *   whole life. Everything is computed from what exists now: a component or stream that is gone
 *   has no series (Prometheus marks them stale at the next scrape).
 */
import type { ScaleName } from '../math/scale.js';
import type { Monitor } from '../detect/monitor.js';
import type { StreamEntry, StreamRegistry } from '../streams/stream-registry.js';
import { METRICS, UNIT_FACTORS } from './metric-names.js';
import { escapeLabelValue, familyHeader, formatValue } from './text-format.js';

type Base = 'bare' | 'seconds' | 'bytes';

/** The base-unit mapping of a declared unit, or null (bare family, stream units). */
export function baseUnitOf(unit: string): { base: 'seconds' | 'bytes'; factor: number } | null {
  return unit !== '' && Object.hasOwn(UNIT_FACTORS, unit) ? UNIT_FACTORS[unit] : null;
}

/** Name of the location/spread family for a stream's unit. */
export function unitFamily(family: string, unit: string): string {
  const b = baseUnitOf(unit);
  return b === null ? family : `${family}_${b.base}`;
}

const HELP = {
  weight: 'Weight of a mixture component in the current (fast) model of a stream, 0..1.',
  refWeight: 'Weight of a mixture component in the reference (slow, what is normal) model of a stream, 0..1.',
  location: 'Location (median) of a component of the current model',
  spread: 'Spread of a component of the current model: half the width of its central 68.27% interval',
  components: 'Number of components in the current model of a stream (0 while bootstrapping).',
  shift: 'Largest detector statistic of a stream divided by its threshold (>= 1: some detector is over threshold).',
  loglik: 'Average log-likelihood per event of recent quiet events under the reference model of a stream, in nats on its model scale.',
  alert: 'Active alerts of a stream by kind and state (pending or firing).',
  events: 'Events accepted into a stream model.',
  lastTs: 'Event time of the last event accepted into a stream, in seconds since the epoch.',
};

function unitSuffixHelp(base: Base): string {
  return base === 'bare' ? ', in the units of the stream.' : ` (converted from the unit of the stream), in ${base}.`;
}

/**
 * One family's samples as bytes. Appending bytes to a reused, growing buffer costs a third of
 * building the same text with string concatenation (and skips flattening and UTF-8 encoding a
 * 10+ MB rope at the end); src/bench/scrape-bench.ts measures it.
 */
class FamilyWriter {
  buf: Buffer;
  len = 0;
  readonly name: Buffer;

  constructor(
    readonly family: string,
    readonly type: 'gauge' | 'counter',
    readonly help: string,
  ) {
    this.name = Buffer.from(family, 'latin1');
    this.buf = Buffer.allocUnsafe(4096);
  }

  /** Start a sample line: name and the stream label (`{stream="..."`, unclosed). */
  begin(streamLabel: Buffer, room: number): void {
    const need = this.len + this.name.length + streamLabel.length + room;
    if (need > this.buf.length) {
      const next = Buffer.allocUnsafe(Math.max(need, 2 * this.buf.length));
      this.buf.copy(next, 0, 0, this.len);
      this.buf = next;
    }
    this.buf.set(this.name, this.len);
    this.len += this.name.length;
    this.buf.set(streamLabel, this.len);
    this.len += streamLabel.length;
  }

  /** Append ASCII text (label syntax, numbers); begin() reserved the room. */
  ascii(s: string): void {
    const b = this.buf;
    let o = this.len;
    for (let i = 0; i < s.length; i++) b[o++] = s.charCodeAt(i);
    this.len = o;
  }

  /** A line for a stream: `name{stream="..."} value`. */
  stream(label: Buffer, value: string): void {
    this.begin(label, value.length + 4);
    this.ascii('} ');
    this.ascii(value);
    this.buf[this.len++] = 10;
  }

  /** A line for a component: `name{stream="...",component="id"} value`. */
  component(label: Buffer, id: number, value: string): void {
    this.begin(label, value.length + 40);
    this.ascii(',component="');
    this.ascii(String(id));
    this.ascii('"} ');
    this.ascii(value);
    this.buf[this.len++] = 10;
  }

  /** Raw ASCII after the stream label, then a newline (for labels beyond stream/component). */
  raw(label: Buffer, rest: string): void {
    this.begin(label, rest.length + 2);
    this.ascii(rest);
    this.buf[this.len++] = 10;
  }
}

/** The model families, in the order they are written. Writers are reused between scrapes. */
class ModelWriters {
  readonly weight = new FamilyWriter(METRICS.componentWeight, 'gauge', HELP.weight);
  readonly refWeight = new FamilyWriter(METRICS.referenceWeight, 'gauge', HELP.refWeight);
  readonly loc: Record<Base, FamilyWriter> = {
    bare: new FamilyWriter(METRICS.componentLocation, 'gauge', HELP.location + unitSuffixHelp('bare')),
    seconds: new FamilyWriter(`${METRICS.componentLocation}_seconds`, 'gauge', HELP.location + unitSuffixHelp('seconds')),
    bytes: new FamilyWriter(`${METRICS.componentLocation}_bytes`, 'gauge', HELP.location + unitSuffixHelp('bytes')),
  };
  readonly spr: Record<Base, FamilyWriter> = {
    bare: new FamilyWriter(METRICS.componentSpread, 'gauge', HELP.spread + unitSuffixHelp('bare')),
    seconds: new FamilyWriter(`${METRICS.componentSpread}_seconds`, 'gauge', HELP.spread + unitSuffixHelp('seconds')),
    bytes: new FamilyWriter(`${METRICS.componentSpread}_bytes`, 'gauge', HELP.spread + unitSuffixHelp('bytes')),
  };
  readonly components = new FamilyWriter(METRICS.streamComponents, 'gauge', HELP.components);
  readonly shift = new FamilyWriter(METRICS.streamShiftScore, 'gauge', HELP.shift);
  readonly loglik = new FamilyWriter(METRICS.streamLogLikelihood, 'gauge', HELP.loglik);
  readonly alert = new FamilyWriter(METRICS.alertActive, 'gauge', HELP.alert);
  readonly events = new FamilyWriter(METRICS.streamEvents, 'counter', HELP.events);
  readonly lastTs = new FamilyWriter(METRICS.streamLastEventTs, 'gauge', HELP.lastTs);

  all(): FamilyWriter[] {
    return [
      this.weight,
      this.refWeight,
      this.loc.bare,
      this.loc.seconds,
      this.loc.bytes,
      this.spr.bare,
      this.spr.seconds,
      this.spr.bytes,
      this.components,
      this.shift,
      this.loglik,
      this.alert,
      this.events,
      this.lastTs,
    ];
  }
}

/** `{stream="<escaped name>"` as UTF-8 bytes, made once per stream entry. */
const streamLabels = new WeakMap<StreamEntry, Buffer>();
function streamLabel(e: StreamEntry): Buffer {
  let b = streamLabels.get(e);
  if (b === undefined) {
    b = Buffer.from(`{stream="${escapeLabelValue(e.name)}"`, 'utf8');
    streamLabels.set(e, b);
  }
  return b;
}

const writersByRegistry = new WeakMap<StreamRegistry, ModelWriters>();
/** A chunked render in progress per registry: concurrent scrapes share it (they would share the writers). */
const inFlight = new WeakMap<StreamRegistry, Promise<Buffer>>();

function writersFor(registry: StreamRegistry): ModelWriters {
  let w = writersByRegistry.get(registry);
  if (w === undefined) {
    w = new ModelWriters();
    writersByRegistry.set(registry, w);
  }
  for (const f of w.all()) f.len = 0;
  return w;
}

function writeStream(w: ModelWriters, e: StreamEntry): void {
  const m = e.monitor;
  const s = streamLabel(e);
  const bu = baseUnitOf(m.config.unit);
  const base: Base = bu === null ? 'bare' : bu.base;
  const factor = bu === null ? 1 : bu.factor;
  const cur = m.current;
  const ref = m.reference;
  const scale = m.scale;
  if (cur !== null) {
    const loc = w.loc[base];
    const spr = w.spr[base];
    for (let j = 0; j < cur.k; j++) {
      const id = cur.id(j);
      const mu = cur.mean(j);
      w.weight.component(s, id, formatValue(cur.weight(j)));
      loc.component(s, id, formatValue(factor * locationOf(scale, mu)));
      spr.component(s, id, formatValue(factor * spreadOf(scale, mu, cur.sd(j))));
    }
  }
  if (ref !== null) for (let j = 0; j < ref.k; j++) w.refWeight.component(s, ref.id(j), formatValue(ref.weight(j)));
  w.components.stream(s, String(cur === null ? 0 : cur.k));
  w.shift.stream(s, formatValue(m.shiftScore()));
  const ll = readLogLikelihood(m);
  if (ll !== null) w.loglik.stream(s, formatValue(ll));
  writeAlerts(w.alert, m, s);
  w.events.stream(s, String(m.eventsAccepted));
  w.lastTs.stream(s, formatValue(m.lastEventTs / 1000));
}

function finish(w: ModelWriters): Buffer {
  const parts: Buffer[] = [];
  for (const f of w.all()) {
    if (f.len === 0) continue;
    parts.push(Buffer.from(familyHeader(f.family, f.type, f.help), 'utf8'), f.buf.subarray(0, f.len));
  }
  return Buffer.concat(parts);
}

/** Writes the model families of every stream in the registry, as UTF-8 bytes of the text format (in one go). */
export function renderModelMetricsBuffer(registry: StreamRegistry): Buffer {
  // While a chunked render holds the registry's writers, write into fresh ones.
  const w = inFlight.has(registry) ? new ModelWriters() : writersFor(registry);
  for (const e of registry.streams()) writeStream(w, e);
  return finish(w);
}

/**
 * The same bytes, written `chunk` streams at a time with a turn of the event loop between chunks,
 * so that a scrape of tens of thousands of streams delays event processing by one chunk's time,
 * not the whole render's. Streams are those present when the render starts; each stream's lines
 * are written at once, so they are consistent per stream (a scrape was never an atomic snapshot
 * across streams). Concurrent calls share one render.
 */
export function renderModelMetricsChunked(registry: StreamRegistry, chunk = 1000): Promise<Buffer> {
  const running = inFlight.get(registry);
  if (running !== undefined) return running;
  const p = (async () => {
    const w = writersFor(registry);
    const entries = [...registry.streams()];
    for (let i = 0; i < entries.length; i += chunk) {
      if (i > 0) await new Promise<void>((r) => setImmediate(r));
      const end = Math.min(entries.length, i + chunk);
      for (let j = i; j < end; j++) writeStream(w, entries[j]);
    }
    return finish(w);
  })();
  inFlight.set(registry, p);
  const clear = () => inFlight.delete(registry);
  p.then(clear, clear);
  return p;
}

/** The model families as text (see renderModelMetricsBuffer, which the HTTP server uses). */
export function renderModelMetrics(registry: StreamRegistry): string {
  return renderModelMetricsBuffer(registry).toString('utf8');
}

/** Median in stream units of a component N(mu, sd) on the model scale (summarizeComponent in math/mixture1d.ts, inlined). */
function locationOf(scale: ScaleName, mu: number): number {
  return scale === 'identity' ? mu : scale === 'log' ? Math.exp(mu) : Math.expm1(mu);
}

function spreadOf(scale: ScaleName, mu: number, sd: number): number {
  if (scale === 'identity') return sd;
  if (scale === 'log') return 0.5 * (Math.exp(mu + sd) - Math.exp(mu - sd));
  return 0.5 * (Math.expm1(mu + sd) - Math.expm1(mu - sd));
}

function readLogLikelihood(m: Monitor): number | null {
  const v = m.logLikelihoodPerEvent();
  return v !== null && Number.isFinite(v) ? v : null;
}

function writeAlerts(f: FamilyWriter, m: Monitor, s: Buffer): void {
  const active = m.alerts();
  if (active.length === 0) return;
  // Count by (kind, state): a stream may have two alerts of one kind on different components.
  const counts = new Map<string, number>();
  for (const a of active) {
    const key = `${a.kind}",state="${a.state}`;
    counts.set(key, (counts.get(key) ?? 0) + 1);
  }
  for (const [key, n] of counts) f.raw(s, `,kind="${key}"} ${n}`);
}
