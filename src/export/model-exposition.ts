/**
 * The per-stream model metrics, written straight into the Prometheus text exposition format
 * (0.0.4) from the registry at scrape time. String building instead of prom-client: with tens
 * of thousands of streams a scrape has 100k+ series, and prom-client's per-label-set objects and
 * hashing cost several times more (src/bench/scrape-bench.ts measures the ratio).
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
import type { StreamMonitor } from '../detect/stream-monitor.js';
import type { StreamRegistry } from '../streams/stream-registry.js';
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

/**
 * A monitor may offer the current model's average log-likelihood per event (nats, stream units).
 * Read when present so that the metric appears as soon as detection provides it.
 */
interface FitReadout {
  logLikelihoodPerEvent?: () => number | null;
}

const HELP = {
  weight: 'Weight of a mixture component in the current (fast) model of a stream, 0..1.',
  refWeight: 'Weight of a mixture component in the reference (slow, what is normal) model of a stream, 0..1.',
  location: 'Location (median) of a component of the current model',
  spread: 'Spread of a component of the current model: half the width of its central 68.27% interval',
  components: 'Number of components in the current model of a stream (0 while bootstrapping).',
  shift: 'Largest detector statistic of a stream divided by its threshold (>= 1: some detector is over threshold).',
  loglik: 'Average log-likelihood per event of recent events under the current model of a stream, in nats.',
  alert: 'Active alerts of a stream by kind and state (pending or firing).',
  events: 'Events accepted into a stream model.',
  lastTs: 'Event time of the last event accepted into a stream, in seconds since the epoch.',
};

function unitSuffixHelp(base: Base): string {
  return base === 'bare' ? ', in the units of the stream.' : ` (converted from the unit of the stream), in ${base}.`;
}

/** Writes the model families of every stream in the registry. */
export function renderModelMetrics(registry: StreamRegistry): string {
  let weight = '';
  let refWeight = '';
  const loc: Record<Base, string> = { bare: '', seconds: '', bytes: '' };
  const spr: Record<Base, string> = { bare: '', seconds: '', bytes: '' };
  let components = '';
  let shift = '';
  let loglik = '';
  let alert = '';
  let events = '';
  let lastTs = '';
  const W = METRICS.componentWeight;
  const RW = METRICS.referenceWeight;
  const locName: Record<Base, string> = {
    bare: METRICS.componentLocation,
    seconds: `${METRICS.componentLocation}_seconds`,
    bytes: `${METRICS.componentLocation}_bytes`,
  };
  const sprName: Record<Base, string> = {
    bare: METRICS.componentSpread,
    seconds: `${METRICS.componentSpread}_seconds`,
    bytes: `${METRICS.componentSpread}_bytes`,
  };

  for (const e of registry.streams()) {
    const m = e.monitor;
    const s = `{stream="${escapeLabelValue(e.name)}"`;
    const bu = baseUnitOf(m.config.unit);
    const base: Base = bu === null ? 'bare' : bu.base;
    const factor = bu === null ? 1 : bu.factor;
    const cur = m.current;
    const ref = m.reference;
    const scale = m.scale;
    let l = '';
    let p = '';
    if (cur !== null) {
      for (let j = 0; j < cur.k; j++) {
        const c = `${s},component="${cur.id(j)}"} `;
        weight += `${W}${c}${formatValue(cur.weight(j))}\n`;
        const mu = cur.mean(j);
        const sd = cur.sd(j);
        l += `${locName[base]}${c}${formatValue(factor * locationOf(scale, mu))}\n`;
        p += `${sprName[base]}${c}${formatValue(factor * spreadOf(scale, mu, sd))}\n`;
      }
      loc[base] += l;
      spr[base] += p;
    }
    if (ref !== null) {
      for (let j = 0; j < ref.k; j++) refWeight += `${RW}${s},component="${ref.id(j)}"} ${formatValue(ref.weight(j))}\n`;
    }
    components += `${METRICS.streamComponents}${s}} ${cur === null ? 0 : cur.k}\n`;
    shift += `${METRICS.streamShiftScore}${s}} ${formatValue(m.shiftScore())}\n`;
    const ll = readLogLikelihood(m);
    if (ll !== null) loglik += `${METRICS.streamLogLikelihood}${s}} ${formatValue(ll)}\n`;
    alert += alertLines(m, s);
    events += `${METRICS.streamEvents}${s}} ${m.eventsAccepted}\n`;
    lastTs += `${METRICS.streamLastEventTs}${s}} ${formatValue(m.lastEventTs / 1000)}\n`;
  }

  let out = '';
  const put = (name: string, type: 'gauge' | 'counter', help: string, body: string) => {
    if (body !== '') out += familyHeader(name, type, help) + body;
  };
  put(W, 'gauge', HELP.weight, weight);
  put(RW, 'gauge', HELP.refWeight, refWeight);
  for (const b of ['bare', 'seconds', 'bytes'] as const) put(locName[b], 'gauge', HELP.location + unitSuffixHelp(b), loc[b]);
  for (const b of ['bare', 'seconds', 'bytes'] as const) put(sprName[b], 'gauge', HELP.spread + unitSuffixHelp(b), spr[b]);
  put(METRICS.streamComponents, 'gauge', HELP.components, components);
  put(METRICS.streamShiftScore, 'gauge', HELP.shift, shift);
  put(METRICS.streamLogLikelihood, 'gauge', HELP.loglik, loglik);
  put(METRICS.alertActive, 'gauge', HELP.alert, alert);
  put(METRICS.streamEvents, 'counter', HELP.events, events);
  put(METRICS.streamLastEventTs, 'gauge', HELP.lastTs, lastTs);
  return out;
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

function readLogLikelihood(m: StreamMonitor): number | null {
  const f = (m as unknown as FitReadout).logLikelihoodPerEvent;
  if (typeof f !== 'function') return null;
  const v = f.call(m);
  return typeof v === 'number' && Number.isFinite(v) ? v : null;
}

function alertLines(m: StreamMonitor, s: string): string {
  const active = m.alerts();
  if (active.length === 0) return '';
  // Count by (kind, state): a stream may have two alerts of one kind on different components.
  const counts = new Map<string, number>();
  for (const a of active) {
    const key = `${a.kind}",state="${a.state}`;
    counts.set(key, (counts.get(key) ?? 0) + 1);
  }
  let out = '';
  for (const [key, n] of counts) out += `${METRICS.alertActive}${s},kind="${key}"} ${n}\n`;
  return out;
}
