/**
 * Scrape cost at scale: 10 000 streams of 3 components each (invented latency, size and unitless
 * streams, models declared as known components so that setup skips 10 000 bootstrap fits).
 *  - time to render the model families (the hand-written exposition) and the whole /metrics body;
 *  - the event-loop delay a scrape causes to event processing running in the same loop, measured
 *    with perf_hooks.monitorEventLoopDelay, against the same processing without scrapes;
 *  - prom-client's render time for the same model series (gauges filled in a collect callback, the
 *    way a prom-client collector would publish them), and the ratio.
 *
 * Run: npm run build && node dist/bench/scrape-bench.js [streams]
 */
import { monitorEventLoopDelay } from 'node:perf_hooks';
import { pathToFileURL } from 'node:url';
import { Counter, Gauge, Registry } from 'prom-client';
import { knownMixture, monitorConfig, type KnownComponent } from '../detect/monitor-config.js';
import { HealthState } from '../export/daemon-health.js';
import { METRICS } from '../export/metric-names.js';
import { renderModelMetricsBuffer, unitFamily } from '../export/model-exposition.js';
import { MetricsExporter } from '../export/render-metrics.js';
import { EventSlot } from '../ingest/event.js';
import { Random } from '../math/random.js';
import { StreamRegistry } from '../streams/stream-registry.js';

export interface BenchResult {
  bench: string;
  value: number;
  unit: string;
}

const KINDS: { unit: string; known: KnownComponent[] }[] = [
  {
    unit: 'milliseconds',
    known: [
      { weight: 0.7, family: 'lognormal', location: 40, spread: 0.2 },
      { weight: 0.25, family: 'lognormal', location: 180, spread: 0.25 },
      { weight: 0.05, family: 'lognormal', location: 900, spread: 0.2 },
    ],
  },
  {
    unit: 'bytes',
    known: [
      { weight: 0.5, family: 'lognormal', location: 2_000, spread: 0.3 },
      { weight: 0.3, family: 'lognormal', location: 40_000, spread: 0.3 },
      { weight: 0.2, family: 'lognormal', location: 900_000, spread: 0.3 },
    ],
  },
  {
    unit: '',
    known: [
      { weight: 0.4, family: 'normal', location: -10, spread: 2 },
      { weight: 0.4, family: 'normal', location: 0, spread: 2 },
      { weight: 0.2, family: 'normal', location: 10, spread: 2 },
    ],
  },
];

/** A registry of `streams` streams with 3-component models, each fed `events` events. */
export function scrapeFixture(streams: number, events = 8): { registry: StreamRegistry; feed: (n: number) => void } {
  const configs = KINDS.map((k) => monitorConfig({ unit: k.unit, known: k.known, warmupEvents: 100 }));
  const mixtures = KINDS.map((k) => knownMixture(k.known));
  const kindOf = (name: string) => Number(name.slice(name.lastIndexOf('-') + 1)) % KINDS.length;
  const registry = new StreamRegistry({
    maxStreams: streams,
    resolve: (s) => ({ monitor: configs[kindOf(s)] }),
    onAlert: () => {},
  });
  const names = Array.from({ length: streams }, (_, i) => `svc-${i % 97}/endpoint-${i}`);
  const rng = new Random(17);
  const slot = new EventSlot();
  let next = 0;
  let ts = Date.UTC(2025, 0, 1);
  // Round-robin over the streams, so every one gets events.
  const feed = (n: number) => {
    for (let i = 0; i < n; i++) {
      const name = names[next];
      next = (next + 1) % streams;
      slot.stream = name;
      slot.value = mixtures[kindOf(name)].sample(rng);
      slot.ts = ts++;
      slot.offset++;
      registry.observe(slot);
    }
  };
  feed(streams * events);
  return { registry, feed };
}

function median(xs: number[]): number {
  const s = xs.slice().sort((a, b) => a - b);
  return s[Math.floor(s.length / 2)];
}

/** Median wall time and median CPU time (user + system) of `runs` calls, after two warm-up calls. */
async function timeIt(runs: number, f: () => unknown): Promise<{ wall: number; cpu: number }> {
  const wall: number[] = [];
  const cpu: number[] = [];
  for (let i = 0; i < runs + 2; i++) {
    const c0 = process.cpuUsage();
    const t0 = performance.now();
    await f();
    const t1 = performance.now();
    const c = process.cpuUsage(c0);
    if (i >= 2) {
      wall.push(t1 - t0);
      cpu.push((c.user + c.system) / 1000);
    }
  }
  return { wall: median(wall), cpu: median(cpu) };
}

/** The same model series through prom-client, set in collect callbacks at scrape time. */
function promClientModel(registry: StreamRegistry): Registry {
  const reg = new Registry();
  const registers = [reg];
  const label2 = ['stream', 'component'];
  const weight = new Gauge({ name: METRICS.componentWeight, help: 'w', labelNames: label2, registers });
  const refWeight = new Gauge({ name: METRICS.referenceWeight, help: 'w', labelNames: label2, registers });
  const families = new Map<string, Gauge>();
  const fam = (name: string) => {
    let g = families.get(name);
    if (g === undefined) {
      g = new Gauge({ name, help: 'x', labelNames: label2, registers });
      families.set(name, g);
    }
    return g;
  };
  const components = new Gauge({ name: METRICS.streamComponents, help: 'k', labelNames: ['stream'], registers });
  const shift = new Gauge({ name: METRICS.streamShiftScore, help: 's', labelNames: ['stream'], registers });
  const events = new Counter({ name: METRICS.streamEvents, help: 'n', labelNames: ['stream'], registers });
  const lastTs = new Gauge({ name: METRICS.streamLastEventTs, help: 't', labelNames: ['stream'], registers });
  new Gauge({
    name: 'bench_collect_trigger',
    help: 'fills the model gauges',
    registers,
    collect() {
      for (const g of [weight, refWeight, components, shift, lastTs, ...families.values()]) g.reset();
      events.reset();
      for (const e of registry.streams()) {
        const m = e.monitor;
        const stream = e.name;
        const unit = m.config.unit;
        for (const v of m.views(m.current)) {
          const c = String(v.id);
          weight.set({ stream, component: c }, v.weight);
          fam(unitFamily(METRICS.componentLocation, unit)).set({ stream, component: c }, v.location);
          fam(unitFamily(METRICS.componentSpread, unit)).set({ stream, component: c }, v.spread);
        }
        const ref = m.reference;
        if (ref !== null) for (let j = 0; j < ref.k; j++) refWeight.set({ stream, component: String(ref.id(j)) }, ref.weight(j));
        components.set({ stream }, m.current?.k ?? 0);
        shift.set({ stream }, m.shiftScore());
        events.inc({ stream }, m.eventsAccepted);
        lastTs.set({ stream }, m.lastEventTs / 1000);
      }
      this.set(1);
    },
  });
  return reg;
}

/** Event-loop delay while processing events in batches, optionally scraping every `scrapeEveryMs`. */
async function processingWindow(
  feed: (n: number) => void,
  render: () => Promise<Buffer>,
  ms: number,
  scrapeEveryMs: number | null,
): Promise<{ p99: number; max: number; eventsPerSec: number; scrapes: number }> {
  const h = monitorEventLoopDelay({ resolution: 1 });
  let events = 0;
  let scrapes = 0;
  let stop = false;
  const t0 = performance.now();
  h.enable();
  const processing = new Promise<void>((resolve) => {
    const step = () => {
      if (stop) return resolve();
      feed(500);
      events += 500;
      setImmediate(step);
    };
    setImmediate(step);
  });
  const timer =
    scrapeEveryMs === null
      ? null
      : setInterval(() => {
          void render().then(() => scrapes++);
        }, scrapeEveryMs);
  await new Promise((r) => setTimeout(r, ms));
  stop = true;
  if (timer !== null) clearInterval(timer);
  await processing;
  h.disable();
  const secs = (performance.now() - t0) / 1000;
  return { p99: h.percentile(99) / 1e6, max: h.max / 1e6, eventsPerSec: events / secs, scrapes };
}

export async function benchScrape(streams = 10_000): Promise<BenchResult[]> {
  const out: BenchResult[] = [];
  const { registry, feed } = scrapeFixture(streams);
  const exporter = new MetricsExporter(registry, new HealthState(), { version: 'bench' });
  const body = renderModelMetricsBuffer(registry).toString('utf8');
  const series = body.split('\n').filter((l) => l !== '' && !l.startsWith('#')).length;
  out.push({ bench: 'scrape_model_series', value: series, unit: 'series' });
  out.push({ bench: 'scrape_body_size', value: Math.round(Buffer.byteLength(body) / 1024), unit: 'KiB' });

  // CPU time is reported beside wall time: on a shared machine wall time also counts waiting for a core.
  const model = await timeIt(15, () => renderModelMetricsBuffer(registry));
  out.push({ bench: `scrape_render_model_${streams}x3_wall`, value: round(model.wall), unit: 'ms' });
  out.push({ bench: `scrape_render_model_${streams}x3_cpu`, value: round(model.cpu), unit: 'ms' });
  const full = await timeIt(15, () => exporter.renderBuffer());
  out.push({ bench: `scrape_render_metrics_${streams}x3_wall`, value: round(full.wall), unit: 'ms' });
  out.push({ bench: `scrape_render_metrics_${streams}x3_cpu`, value: round(full.cpu), unit: 'ms' });

  const prom = promClientModel(registry);
  const promMs = await timeIt(5, () => prom.metrics());
  out.push({ bench: `scrape_render_prom_client_${streams}x3_wall`, value: round(promMs.wall), unit: 'ms' });
  out.push({ bench: `scrape_render_prom_client_${streams}x3_cpu`, value: round(promMs.cpu), unit: 'ms' });
  out.push({ bench: 'scrape_prom_client_over_direct_cpu', value: round(promMs.cpu / model.cpu), unit: 'x' });

  const quiet = await processingWindow(feed, () => exporter.renderBuffer(), 2000, null);
  const busy = await processingWindow(feed, () => exporter.renderBuffer(), 3000, 500);
  out.push({ bench: 'scrape_loop_delay_p99_without_scrapes', value: round(quiet.p99), unit: 'ms' });
  out.push({ bench: 'scrape_loop_delay_max_without_scrapes', value: round(quiet.max), unit: 'ms' });
  out.push({ bench: 'scrape_loop_delay_p99_scraping_every_500ms', value: round(busy.p99), unit: 'ms' });
  out.push({ bench: 'scrape_loop_delay_max_scraping_every_500ms', value: round(busy.max), unit: 'ms' });
  out.push({ bench: 'scrape_processing_rate_without_scrapes', value: Math.round(quiet.eventsPerSec), unit: 'events/s' });
  out.push({ bench: 'scrape_processing_rate_scraping_every_500ms', value: Math.round(busy.eventsPerSec), unit: 'events/s' });
  out.push({ bench: 'scrape_scrapes_in_window', value: busy.scrapes, unit: 'scrapes' });
  return out;
}

function round(x: number): number {
  return Math.round(x * 100) / 100;
}

if (import.meta.url === pathToFileURL(process.argv[1] ?? '').href) {
  const n = Number(process.argv[2] ?? 10_000);
  for (const r of await benchScrape(n)) console.log(JSON.stringify(r));
}
