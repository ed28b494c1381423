// The model exposition written by hand and the daemon families from prom-client, checked against
// the Prometheus text format 0.0.4 (https://prometheus.io/docs/instrumenting/exposition_formats/):
// label escaping, one HELP/TYPE per family with its samples together, base units, and series that
// follow the streams and components that exist at scrape time.
import { describe, expect, it } from 'vitest';
import { monitorConfig, type MonitorConfig } from '../src/detect/monitor-config.js';
import type { AlertTransition } from '../src/detect/alert.js';
import { HealthState, splitPartitionName } from '../src/export/daemon-health.js';
import { REJECTION_REASONS } from '../src/export/daemon-metrics.js';
import { METRICS } from '../src/export/metric-names.js';
import { renderModelMetrics, renderModelMetricsBuffer, renderModelMetricsChunked } from '../src/export/model-exposition.js';
import { MetricsExporter } from '../src/export/render-metrics.js';
import { escapeLabelValue, formatValue } from '../src/export/text-format.js';
import { EventSlot } from '../src/ingest/event.js';
import { Mixture1D } from '../src/math/mixture1d.js';
import { Random } from '../src/math/random.js';
import { StreamRegistry } from '../src/streams/stream-registry.js';

interface Sample {
  name: string;
  labels: Record<string, string>;
  value: number;
}

interface Parsed {
  samples: Sample[];
  help: Map<string, string>;
  type: Map<string, string>;
}

/** A strict reader of the text format: throws on a repeated HELP/TYPE or a family split in two. */
function parseExposition(text: string): Parsed {
  const help = new Map<string, string>();
  const type = new Map<string, string>();
  const samples: Sample[] = [];
  const closed = new Set<string>();
  let open = '';
  const familyOf = (name: string) => {
    for (const suffix of ['_bucket', '_sum', '_count', '']) {
      const base = suffix === '' ? name : name.endsWith(suffix) ? name.slice(0, -suffix.length) : null;
      if (base !== null && type.has(base)) return base;
    }
    return name;
  };
  const switchTo = (fam: string) => {
    if (fam === open) return;
    if (closed.has(fam)) throw new Error(`family ${fam} appears in two groups`);
    if (open !== '') closed.add(open);
    open = fam;
  };
  expect(text.endsWith('\n')).toBe(true);
  for (const line of text.split('\n')) {
    if (line === '') continue;
    const meta = /^# (HELP|TYPE) ([a-zA-Z_:][a-zA-Z0-9_:]*) (.*)$/.exec(line);
    if (meta) {
      const map = meta[1] === 'HELP' ? help : type;
      if (map.has(meta[2])) throw new Error(`second ${meta[1]} for ${meta[2]}`);
      map.set(meta[2], meta[3]);
      switchTo(meta[2]);
      continue;
    }
    const m = /^([a-zA-Z_:][a-zA-Z0-9_:]*)(\{(.*)\})? (\S+)$/.exec(line);
    if (!m) throw new Error(`not a sample line: ${line}`);
    const labels: Record<string, string> = {};
    if (m[3] !== undefined) {
      const re = /([a-zA-Z_][a-zA-Z0-9_]*)="((?:[^"\\\n]|\\[\\"n])*)"(,|$)/y;
      let pos = 0;
      while (pos < m[3].length) {
        re.lastIndex = pos;
        const l = re.exec(m[3]);
        if (!l) throw new Error(`bad labels in: ${line}`);
        labels[l[1]] = l[2].replace(/\\(.)/g, (_, c: string) => (c === 'n' ? '\n' : c));
        pos = re.lastIndex;
      }
    }
    const v = m[4] === '+Inf' ? Infinity : m[4] === '-Inf' ? -Infinity : Number(m[4]);
    if (m[4] !== 'NaN' && Number.isNaN(v)) throw new Error(`bad value in: ${line}`);
    switchTo(familyOf(m[1]));
    samples.push({ name: m[1], labels, value: v });
  }
  return { samples, help, type };
}

function registry(units: Record<string, string>, overrides: Partial<MonitorConfig> = {}, onAlert: (t: AlertTransition) => void = () => {}): StreamRegistry {
  return new StreamRegistry({
    maxStreams: 100,
    resolve: (s) => ({ monitor: monitorConfig({ unit: units[s] ?? '', bootstrapEvents: 300, warmupEvents: 500, ...overrides }) }),
    onAlert,
  });
}

const slot = new EventSlot();
function feed(reg: StreamRegistry, stream: string, mix: Mixture1D, n: number, rng: Random, t0 = 1.7e12): void {
  for (let i = 0; i < n; i++) {
    slot.stream = stream;
    slot.value = mix.sample(rng);
    slot.ts = t0 + i * 10;
    slot.offset = i;
    reg.observe(slot);
  }
}

// Invented latency-like stream: a fast mode near 40 and a slow one near 180 (log-normal components).
const latency = new Mixture1D('log', [0.8, 0.2], [Math.log(40), Math.log(180)], [0.15, 0.2]);
// Invented symmetric stream on the identity scale.
const level = new Mixture1D('identity', [0.5, 0.5], [-5, 5], [1, 1]);

function only(p: Parsed, name: string, labels: Record<string, string>): Sample[] {
  return p.samples.filter((s) => s.name === name && Object.entries(labels).every(([k, v]) => s.labels[k] === v));
}

describe('text format pieces', () => {
  it('escapes backslash, double quote and line feed in label values, and nothing else', () => {
    expect(escapeLabelValue('plain name/with:odd{chars}')).toBe('plain name/with:odd{chars}');
    expect(escapeLabelValue('a"b\\c\nd')).toBe('a\\"b\\\\c\\nd');
    expect(escapeLabelValue('\\n')).toBe('\\\\n');
  });
  it('formats special floats as the format spells them', () => {
    expect(formatValue(NaN)).toBe('NaN');
    expect(formatValue(Infinity)).toBe('+Inf');
    expect(formatValue(-Infinity)).toBe('-Inf');
    expect(Number(formatValue(1e-7))).toBe(1e-7);
    expect(Number(formatValue(0.1 + 0.2))).toBe(0.1 + 0.2);
  });
  it('splits partition names at the last dash', () => {
    expect(splitPartitionName('checkout-latency-12')).toEqual({ topic: 'checkout-latency', partition: '12' });
    expect(splitPartitionName('stdin')).toEqual({ topic: 'stdin', partition: '' });
  });
});

describe('model exposition', () => {
  const rng = new Random(11);
  const weird = 'lat"x\\y\nz Zürich ✓';
  const reg = registry({ [weird]: 'milliseconds', sizes: 'kilobytes', plain: '', odd: 'requests', proto: 'constructor' });
  feed(reg, weird, latency, 1500, rng);
  feed(reg, 'sizes', latency, 1500, rng);
  feed(reg, 'plain', level, 1500, rng);
  feed(reg, 'odd', level, 1500, rng);
  feed(reg, 'proto', level, 1500, rng);
  feed(reg, 'booting', level, 50, rng); // still bootstrapping: no model yet

  it('round-trips an awkward stream name through label escaping', () => {
    const p = parseExposition(renderModelMetrics(reg));
    const names = new Set(p.samples.map((s) => s.labels.stream));
    expect(names).toEqual(new Set([weird, 'sizes', 'plain', 'odd', 'proto', 'booting']));
  });

  it('writes HELP and TYPE once per family, with all its samples together', () => {
    const p = parseExposition(renderModelMetrics(reg));
    expect(p.type.get(METRICS.componentWeight)).toBe('gauge');
    expect(p.type.get(METRICS.streamEvents)).toBe('counter');
    for (const name of p.type.keys()) expect(p.help.has(name)).toBe(true);
    // Every sample belongs to a declared family.
    for (const s of p.samples) expect(p.type.has(s.name)).toBe(true);
  });

  it('publishes location and spread in base units, in the family of the unit', () => {
    const p = parseExposition(renderModelMetrics(reg));
    const check = (stream: string, family: string, factor: number) => {
      const m = reg.get(stream)!.monitor;
      const views = m.views(m.current);
      expect(views.length).toBeGreaterThan(0);
      for (const v of views) {
        const loc = only(p, `${METRICS.componentLocation}${family}`, { stream, component: String(v.id) });
        const spr = only(p, `${METRICS.componentSpread}${family}`, { stream, component: String(v.id) });
        expect(loc).toHaveLength(1);
        expect(spr).toHaveLength(1);
        expect(loc[0].value).toBeCloseTo(v.location * factor, 12);
        expect(spr[0].value).toBeCloseTo(v.spread * factor, 12);
      }
      // and in no other location family
      for (const other of ['', '_seconds', '_bytes'].filter((f) => f !== family)) {
        expect(only(p, `${METRICS.componentLocation}${other}`, { stream })).toHaveLength(0);
      }
    };
    check(weird, '_seconds', 1e-3); // milliseconds -> seconds
    check('sizes', '_bytes', 1e3); // kilobytes -> bytes
    check('plain', '', 1); // no unit: bare family, stream units
    check('odd', '', 1); // a unit without a base-unit mapping: bare family
    check('proto', '', 1); // not fooled by Object.prototype keys
    // The latency modes sit near 40 ms and 180 ms: 0.04 s and 0.18 s.
    const locs = only(p, `${METRICS.componentLocation}_seconds`, { stream: weird }).map((s) => s.value).sort((a, b) => a - b);
    expect(locs[0]).toBeGreaterThan(0.03);
    expect(locs[0]).toBeLessThan(0.05);
    expect(locs[locs.length - 1]).toBeGreaterThan(0.14);
    expect(locs[locs.length - 1]).toBeLessThan(0.22);
  });

  it('labels components by stable id, with weights of current and reference models', () => {
    const p = parseExposition(renderModelMetrics(reg));
    const m = reg.get('plain')!.monitor;
    const cur = m.current!;
    const ids = [];
    for (let j = 0; j < cur.k; j++) ids.push(String(cur.id(j)));
    const w = only(p, METRICS.componentWeight, { stream: 'plain' });
    expect(w.map((s) => s.labels.component).sort()).toEqual(ids.sort());
    expect(w.reduce((a, s) => a + s.value, 0)).toBeCloseTo(1, 9);
    const rw = only(p, METRICS.referenceWeight, { stream: 'plain' });
    expect(rw.length).toBe(m.reference!.k);
    expect(only(p, METRICS.streamComponents, { stream: 'plain' })[0].value).toBe(cur.k);
    expect(only(p, METRICS.streamComponents, { stream: 'booting' })[0].value).toBe(0);
    expect(only(p, METRICS.componentWeight, { stream: 'booting' })).toHaveLength(0);
    expect(only(p, METRICS.streamEvents, { stream: 'booting' })[0].value).toBe(50);
    expect(only(p, METRICS.streamLastEventTs, { stream: 'plain' })[0].value).toBeCloseTo((1.7e12 + 1499 * 10) / 1000, 3);
  });

  it('writes the same bytes in chunks between turns of the event loop, one render for concurrent scrapes', async () => {
    const whole = renderModelMetricsBuffer(reg);
    const a = renderModelMetricsChunked(reg, 2);
    const b = renderModelMetricsChunked(reg, 2);
    expect(b).toBe(a); // shared while in flight
    const during = renderModelMetrics(reg); // a one-go render meanwhile uses its own writers
    expect((await a).equals(whole)).toBe(true);
    expect(during).toBe(whole.toString('utf8'));
    expect((await renderModelMetricsChunked(reg, 1)).equals(whole)).toBe(true);
  });

  it('drops the series of a stream that is removed', () => {
    const local = registry({});
    feed(local, 'a', level, 600, new Random(3));
    feed(local, 'b', level, 600, new Random(4));
    expect(renderModelMetrics(local)).toContain('stream="b"');
    local.remove('b');
    const after = renderModelMetrics(local);
    expect(after).not.toContain('stream="b"');
    expect(after).toContain('stream="a"');
    local.remove('a');
    expect(renderModelMetrics(local)).toBe('');
  });

  it('counts active alerts by kind and state, and their series go when the alert does', () => {
    // Known reference, then a far new mode at 10 % of the events: the novelty detector opens mode_emerged.
    const transitions: AlertTransition[] = [];
    const known = monitorConfig({
      warmupEvents: 200,
      known: [
        { weight: 0.5, family: 'normal', location: -5, spread: 1 },
        { weight: 0.5, family: 'normal', location: 5, spread: 1 },
      ],
    });
    const local = new StreamRegistry({ maxStreams: 10, resolve: () => ({ monitor: known }), onAlert: (t) => transitions.push(t) });
    const r = new Random(5);
    feed(local, 's', level, 2000, r);
    expect(renderModelMetrics(local)).not.toContain(METRICS.alertActive);
    const shifted = new Mixture1D('identity', [0.45, 0.45, 0.1], [-5, 5, 40], [1, 1, 1]);
    feed(local, 's', shifted, 3000, r, 1.7e12 + 20_000);
    const m = local.get('s')!.monitor;
    const active = m.alerts();
    expect(active.some((a) => a.kind === 'mode_emerged')).toBe(true);
    const p = parseExposition(renderModelMetrics(local));
    const series = only(p, METRICS.alertActive, { stream: 's' });
    const total = series.reduce((a, s) => a + s.value, 0);
    expect(total).toBe(active.length);
    for (const s of series) expect(['pending', 'firing']).toContain(s.labels.state);
    expect(series.some((s) => s.labels.kind === 'mode_emerged')).toBe(true);
    // The third component shows with its own id.
    expect(only(p, METRICS.componentWeight, { stream: 's' }).length).toBe(3);
    m.rebaseline();
    expect(renderModelMetrics(local)).not.toContain(METRICS.alertActive);
  });
});

describe('daemon metrics', () => {
  it('pre-initialises every rejection reason and alert transition, and reads the health at scrape time', async () => {
    const reg = registry({});
    feed(reg, 'a', level, 400, new Random(2));
    reg.reject('unparseable');
    reg.reject('unparseable');
    const health = new HealthState();
    health.lagByPartition.set('latency-0', 12);
    health.lagByPartition.set('latency-3', 0);
    const exporter = new MetricsExporter(reg, health, { version: '9.9.9', processMetrics: false });
    let p = parseExposition(await exporter.render());
    for (const reason of REJECTION_REASONS) {
      expect(only(p, METRICS.rejectedTotal, { reason })).toHaveLength(1);
    }
    expect(only(p, METRICS.rejectedTotal, { reason: 'unparseable' })[0].value).toBe(2);
    expect(only(p, METRICS.rejectedTotal, { reason: 'stream_limit' })[0].value).toBe(0);
    expect(only(p, METRICS.eventsTotal, {})[0].value).toBe(400);
    expect(only(p, METRICS.streams, {})[0].value).toBe(1);
    expect(only(p, METRICS.alertTransitionsTotal, {})).toHaveLength(10); // 5 kinds x (firing, resolved)
    expect(only(p, METRICS.consumerLag, { topic: 'latency', partition: '0' })[0].value).toBe(12);
    expect(only(p, METRICS.buildInfo, { version: '9.9.9', node_version: process.version })[0].value).toBe(1);
    expect(only(p, METRICS.ready, {})[0].value).toBe(0);
    expect(only(p, METRICS.checkpointAge, {})).toHaveLength(0); // checkpointing off: no series
    // Both halves in one exposition: model families follow the daemon's.
    expect(only(p, METRICS.componentWeight, { stream: 'a' }).length).toBeGreaterThan(0);

    health.isReady = true;
    health.checkpointingEnabled = true;
    health.startedMs = 1_000_000;
    health.lastCheckpointMs = 1_000_000;
    health.now = () => 1_030_000;
    health.lagByPartition.delete('latency-3');
    health.transitionCounter.record({ kind: 'mode_emerged', state: 'firing' } as AlertTransition);
    p = parseExposition(await exporter.render());
    expect(only(p, METRICS.ready, {})[0].value).toBe(1);
    expect(only(p, METRICS.checkpointAge, {})[0].value).toBe(30);
    expect(only(p, METRICS.consumerLag, { partition: '3' })).toHaveLength(0);
    expect(only(p, METRICS.alertTransitionsTotal, { kind: 'mode_emerged', state: 'firing' })[0].value).toBe(1);
    expect(only(p, METRICS.scrapeSeconds, {})[0].value).toBeGreaterThan(0);
  });

  it('puts prom-client process metrics under the modewatch_ prefix', async () => {
    const exporter = new MetricsExporter(registry({}), new HealthState(), { version: '0' });
    const p = parseExposition(await exporter.render());
    const names = [...p.type.keys()];
    expect(names).toContain('modewatch_process_cpu_seconds_total');
    expect(names.every((n) => n.startsWith('modewatch_'))).toBe(true);
  });
});
