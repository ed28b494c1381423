/**
 * The built-in scenarios used by the detection benchmark and the tests. Every one is invented: the numbers are
 * plausible shapes for latency and payload-size streams, not measurements of any real system.
 * Lengths are parameters: `events` per stream and `changeAt`, the stream-local index where the change happens.
 */
import type { ComponentSpec, MixtureSpec } from './families.js';
import { DEFAULT_START, type ChangeSpec, type Scenario, type StreamSpec } from './scenario.js';

export interface SuiteOptions {
  /** Events per stream (default 20 000). */
  events?: number;
  /** Stream-local event index of the change (default: half of events). */
  changeAt?: number;
  /** Events per second of event time (default 200). */
  rate?: number;
}

export interface SuiteEntry {
  description: string;
  build(options?: SuiteOptions): Scenario;
}

const LN = Math.log;
const fast: ComponentSpec = { family: 'lognormal', meanlog: LN(40), sdlog: 0.25 };
const db: ComponentSpec = { family: 'lognormal', meanlog: LN(180), sdlog: 0.3 };
const slow: ComponentSpec = { family: 'lognormal', meanlog: LN(900), sdlog: 0.2 };
const twoModes: MixtureSpec = { weights: [0.8, 0.2], components: [fast, db] };
/** A wide distribution for scattered outliers: median 150 ms, spanning microseconds to minutes. */
const wide: ComponentSpec = { family: 'lognormal', meanlog: LN(150), sdlog: 2 };

function resolve(o: SuiteOptions = {}): { events: number; changeAt: number; rate: number } {
  const events = o.events ?? 20_000;
  if (!Number.isInteger(events) || events < 2) throw new Error(`events must be an integer >= 2, got ${events}`);
  const changeAt = o.changeAt ?? Math.floor(events / 2);
  if (!Number.isInteger(changeAt) || changeAt < 0 || changeAt >= events) throw new Error(`changeAt must be an integer in [0, ${events}), got ${changeAt}`);
  const rate = o.rate ?? 200;
  if (!(rate > 0)) throw new Error(`rate must be > 0, got ${rate}`);
  return { events, changeAt, rate };
}

function stream(name: string, initial: MixtureSpec, changes: ChangeSpec[], o: { events: number; rate: number }): StreamSpec {
  return {
    name,
    start: DEFAULT_START,
    rate: o.rate,
    gaps: 'exponential',
    count: o.events,
    initial: { weights: initial.weights.slice(), components: initial.components.map((c) => ({ ...c })) },
    changes,
  };
}

function latency(name: string, description: string, initial: MixtureSpec, changes: (at: number, events: number) => ChangeSpec[]): SuiteEntry {
  return {
    description,
    build(options) {
      const o = resolve(options);
      return { name, description, streams: [stream('checkout-latency-ms', initial, changes(o.changeAt, o.events), o)] };
    },
  };
}

const PAYLOAD_DESCRIPTION =
  'Invented response payload sizes (bytes): a gamma mode near 480 B (60%), a gamma mode near 4.2 KB (35%) and a Pareto tail from 20 KB (5%); the tail grows to 15%.';
const BAD_INPUT_DESCRIPTION =
  'Invented: two latency streams (checkout, search), interleaved, stationary, with 0.2% malformed lines of every kind and 0.05% outliers; for testing rejection counting.';

export const SCENARIOS: Record<string, SuiteEntry> = {
  'latency-stationary': latency(
    'latency-stationary',
    'Invented checkout latency (ms): a cache-served mode near 40 ms carrying 80% and a database mode near 180 ms; nothing changes.',
    twoModes,
    () => [],
  ),
  'latency-stationary-outliers': latency(
    'latency-stationary-outliers',
    'Invented checkout latency as in latency-stationary, with 0.05% scattered outliers from a wide log-normal (median 150 ms, sdlog 2); nothing changes.',
    twoModes,
    (_at, events) => [{ kind: 'outliers', at: 0, until: events, fraction: 0.0005, component: wide }],
  ),
  'latency-new-slow-mode': latency(
    'latency-new-slow-mode',
    'Invented checkout latency; a new slow mode near 900 ms appears with 3% of the events.',
    twoModes,
    (at) => [{ kind: 'appear', at, component: slow, weight: 0.03 }],
  ),
  'latency-mode-in-gap': latency(
    'latency-mode-in-gap',
    'Invented checkout latency; a new mode near 85 ms appears in the gap between the 40 ms and 180 ms modes with 8% of the events.',
    twoModes,
    (at) => [{ kind: 'appear', at, component: { family: 'lognormal', meanlog: LN(85), sdlog: 0.12 }, weight: 0.08 }],
  ),
  'latency-mode-vanishes': latency(
    'latency-mode-vanishes',
    'Invented checkout latency with three modes (40 ms 76%, 180 ms 19%, 900 ms 5%); the 900 ms mode vanishes.',
    { weights: [0.76, 0.19, 0.05], components: [fast, db, slow] },
    (at) => [{ kind: 'vanish', at, component: 2 }],
  ),
  'latency-weight-shift': latency(
    'latency-weight-shift',
    'Invented checkout latency; the weights of the 40 ms and 180 ms modes move from 80/20 to 60/40.',
    twoModes,
    (at) => [{ kind: 'weights', at, weights: [0.6, 0.4] }],
  ),
  'latency-location-shift': latency(
    'latency-location-shift',
    'Invented checkout latency; the main (40 ms) mode moves up by one of its standard deviations on the log scale (0.25, to about 51 ms).',
    twoModes,
    (at) => [{ kind: 'shift', at, component: 0, to: LN(40) + 0.25 }],
  ),
  'latency-drift': latency(
    'latency-drift',
    'Invented checkout latency; the main (40 ms) mode drifts up by two of its log-scale standard deviations (to about 66 ms) over a quarter of the stream.',
    twoModes,
    (at, events) => [{ kind: 'drift', at, component: 0, to: LN(40) + 0.5, over: Math.max(1, Math.floor(events / 4)) }],
  ),
  'payload-size-shift': {
    description: PAYLOAD_DESCRIPTION,
    build(options) {
      const o = resolve(options);
      const initial: MixtureSpec = {
        weights: [0.6, 0.35, 0.05],
        components: [
          { family: 'gamma', shape: 8, scale: 60 },
          { family: 'gamma', shape: 6, scale: 700 },
          { family: 'pareto', scale: 20_000, shape: 2.5 },
        ],
      };
      return {
        name: 'payload-size-shift',
        description: PAYLOAD_DESCRIPTION,
        streams: [stream('api-payload-bytes', initial, [{ kind: 'weights', at: o.changeAt, weights: [0.5, 0.35, 0.15] }], o)],
      };
    },
  },
  'latency-bad-input': {
    description: BAD_INPUT_DESCRIPTION,
    build(options) {
      const o = resolve(options);
      const noise = (events: number): ChangeSpec[] => [
        { kind: 'badLines', at: 0, until: events, fraction: 0.002 },
        { kind: 'outliers', at: 0, until: events, fraction: 0.0005, component: wide },
      ];
      return {
        name: 'latency-bad-input',
        description: BAD_INPUT_DESCRIPTION,
        streams: [
          stream('checkout-latency-ms', twoModes, noise(o.events), o),
          stream('search-latency-ms', { weights: [0.7, 0.3], components: [{ family: 'lognormal', meanlog: LN(25), sdlog: 0.3 }, { family: 'lognormal', meanlog: LN(120), sdlog: 0.35 }] }, noise(o.events), { ...o, rate: o.rate / 2 }),
        ],
      };
    },
  },
};

export const SCENARIO_NAMES: readonly string[] = Object.keys(SCENARIOS);

export function buildScenario(name: string, options?: SuiteOptions): Scenario {
  const e = SCENARIOS[name];
  if (e === undefined) throw new Error(`unknown scenario ${JSON.stringify(name)}; built-in scenarios: ${SCENARIO_NAMES.join(', ')}`);
  return e.build(options);
}
