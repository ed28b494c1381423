import { describe, expect, it } from 'vitest';
import type { AlertTransition } from '../../src/detect/alert.js';
import { monitorConfig, type MonitorConfig } from '../../src/detect/monitor-config.js';
import { VectorStreamMonitor, type VectorMonitorState } from '../../src/detect/vector-monitor.js';
import { Random } from '../../src/math/random.js';

// ---- invented 2-D streams: (latency-like ms, size-like bytes) from correlated Gaussian clusters ----

interface Cluster {
  weight: number;
  mean: [number, number];
  sd: [number, number];
  rho: number;
}

const FAST: Cluster = { weight: 0.7, mean: [40, 2000], sd: [5, 300], rho: 0.3 };
const SLOW: Cluster = { weight: 0.3, mean: [180, 8000], sd: [25, 1200], rho: -0.2 };

/** Calls `emit(x, i)` for n events; clusters(i) gives the mixture in force at event i; outliers at rate `outliers`. */
function simulate2d(n: number, seed: number, clusters: (i: number) => Cluster[], emit: (x: Float64Array, i: number) => void, outliers = 0): void {
  const rng = new Random(seed);
  const x = new Float64Array(2);
  for (let i = 0; i < n; i++) {
    if (outliers > 0 && rng.uniform() < outliers) {
      x[0] = 1 + 5000 * rng.uniform();
      x[1] = 1 + 100_000 * rng.uniform();
      emit(x, i);
      continue;
    }
    const cs = clusters(i);
    let u = rng.uniform();
    let c = cs[cs.length - 1];
    for (const k of cs) {
      u -= k.weight;
      if (u < 0) {
        c = k;
        break;
      }
    }
    const a = rng.normal();
    const b = rng.normal();
    x[0] = c.mean[0] + c.sd[0] * a;
    x[1] = c.mean[1] + c.sd[1] * (c.rho * a + Math.sqrt(1 - c.rho * c.rho) * b);
    emit(x, i);
  }
}

/** Invented scenarios: (latency ms, size bytes) from two clusters; the change happens at event CHANGE. */
const CHANGE = 20_000;
const NEW_MODE: Cluster = { weight: 0.03, mean: [900, 4000], sd: [60, 500], rho: 0 };
const SCENARIOS: Record<string, (i: number) => Cluster[]> = {
  stationary: () => [FAST, SLOW],
  weight: (i) => (i < CHANGE ? [FAST, SLOW] : [{ ...FAST, weight: 0.55 }, { ...SLOW, weight: 0.45 }]),
  emerged: (i) => (i < CHANGE ? [FAST, SLOW] : [{ ...FAST, weight: 0.68 }, { ...SLOW, weight: 0.29 }, NEW_MODE]),
  vanished: (i) => (i < CHANGE ? [FAST, SLOW] : [{ ...FAST, weight: 1 }]),
  // The size of the fast cluster grows by 1.5 of its sds (300 bytes -> +450).
  location: (i) => (i < CHANGE ? [FAST, SLOW] : [{ ...FAST, mean: [40, 2450] }, SLOW]),
};

function run(name: string, events: number, seed = 1, outliers = 0, overrides: Partial<MonitorConfig> = {}) {
  const transitions: AlertTransition[] = [];
  const monitor = new VectorStreamMonitor('req', monitorConfig(overrides), (t) => transitions.push(t));
  let rejected = 0;
  simulate2d(events, seed, SCENARIOS[name], (x, i) => {
    if (monitor.observeVector(x, 2, 1.7e12 + 10 * i, i) !== null) rejected++;
  }, outliers);
  expect(rejected).toBe(0);
  expect(monitor.eventsAccepted).toBe(events);
  return { transitions, monitor };
}

function firstFiring(transitions: AlertTransition[]): AlertTransition {
  const firing = transitions.filter((t) => t.state === 'firing');
  expect(firing.filter((t) => t.offset < CHANGE)).toEqual([]);
  expect(firing.length).toBeGreaterThan(0);
  return firing[0];
}

describe('vector stream monitor on simulated 2-D streams', () => {
  it('stays silent on 100 000 stationary events with 0.1 % scattered outliers', () => {
    const { transitions, monitor } = run('stationary', 100_000, 3, 0.001);
    expect(transitions).toEqual([]);
    expect(monitor.state).toBe('armed');
    expect(monitor.dimension).toBe(2);
    expect(monitor.current?.k).toBe(2);
    expect(monitor.shiftScore()).toBeLessThan(1);
    // The reference found both clusters: fast near (40 ms, 2000 B), slow near (180 ms, 8000 B).
    const v = monitor.vectorViews(monitor.reference);
    expect(v.length).toBe(2);
    expect(v[0].mean[0]).toBeCloseTo(40, 0);
    expect(Math.abs(v[0].mean[1] - 2000)).toBeLessThan(30);
    expect(Math.abs(v[0].sd[1] - 300)).toBeLessThan(20);
    expect(Math.abs(v[1].mean[0] - 180)).toBeLessThan(3);
    expect(Math.abs(v[0].weight - 0.7)).toBeLessThan(0.02);
    // Scalar views show the first axis.
    const s = monitor.views(monitor.reference);
    expect(s.map((c) => c.id)).toEqual(v.map((c) => c.id));
    expect(s[0].location).toBe(v[0].mean[0]);
    expect(s[0].spread).toBe(v[0].sd[0]);
  });

  it('a weight shift (70/30 -> 55/45) fires weight_shift on the fast cluster', () => {
    const { transitions, monitor } = run('weight', 24_000);
    const a = firstFiring(transitions);
    expect(a.kind).toBe('weight_shift');
    expect(a.evidence.statistic).toMatch(/^cusum_weight_/);
    expect(a.evidence.value).toBeGreaterThanOrEqual(a.evidence.threshold);
    expect(a.evidence.firstEvidenceOffset).toBeGreaterThanOrEqual(CHANGE - 100);
    // Lorden (1971): delay ≈ h / KL = 18 / 0.050 ≈ 360 events for this change, plus 16 to confirm.
    expect(a.offset - CHANGE).toBeLessThan(1200);
    const fast = monitor.vectorViews(monitor.current).find((c) => c.mean[0] < 100);
    expect(fast?.weight).toBeLessThan(0.65);
  });

  it('a new third cluster (3 %) fires mode_emerged with a new component near it', () => {
    const { transitions, monitor } = run('emerged', 24_000);
    const a = firstFiring(transitions);
    expect(a.kind).toBe('mode_emerged');
    expect(a.offset - CHANGE).toBeLessThan(1500);
    expect(a.evidence.firstEvidenceOffset).toBeGreaterThanOrEqual(CHANGE);
    const id = a.evidence.componentId ?? -1;
    expect(a.evidence.before.map((c) => c.id)).not.toContain(id);
    const born = monitor.vectorViews(monitor.current).find((c) => c.id === id);
    expect(born).toBeDefined();
    expect(Math.abs((born?.mean[0] ?? 0) - 900)).toBeLessThan(60);
    expect(Math.abs((born?.mean[1] ?? 0) - 4000)).toBeLessThan(500);
    expect(born?.weight).toBeGreaterThan(0.015);
    expect(born?.weight).toBeLessThan(0.05);
    expect(transitions.filter((t) => t.kind === 'mode_emerged' && t.state === 'firing').length).toBe(1);
  });

  it('the slow cluster disappearing fires mode_vanished', () => {
    const { transitions } = run('vanished', 22_000);
    const a = firstFiring(transitions);
    expect(a.kind).toBe('mode_vanished');
    expect(a.offset - CHANGE).toBeLessThan(300);
    expect(a.evidence.before.find((c) => c.id === a.evidence.componentId)?.location).toBeGreaterThan(150);
  });

  it('a shift of the fast cluster along the size axis fires location_shift on that axis', () => {
    // A current window of 2 000 events, so that 4 000 events after the change the current model has followed it.
    const { transitions, monitor } = run('location', 24_000, 1, 0, { currentWindow: 2000 });
    const a = firstFiring(transitions);
    expect(a.kind).toBe('location_shift');
    expect(a.evidence.statistic).toBe('cusum_location_up_axis1');
    expect(a.offset - CHANGE).toBeLessThan(300);
    expect(a.evidence.before.find((c) => c.id === a.evidence.componentId)?.location).toBeLessThan(100);
    expect(transitions.filter((t) => t.state === 'firing').map((t) => t.kind)).toEqual(['location_shift']);
    const fast = monitor.vectorViews(monitor.current).find((c) => c.mean[0] < 100);
    expect(Math.abs((fast?.mean[1] ?? 0) - 2450)).toBeLessThan(60);
  });

  it('rejects a wrong dimension and non-finite values, and counts neither', () => {
    const m = new VectorStreamMonitor('req', monitorConfig(), () => {});
    const x = new Float64Array([40, 2000, 7]);
    expect(m.observeVector(x, 2, 0, 0)).toBe(null);
    expect(m.observeVector(x, 3, 1, 1)).toBe('wrong_dimension');
    expect(m.observeVector(x, 1, 1, 1)).toBe('wrong_dimension');
    expect(m.observeVector(x, 9, 1, 1)).toBe('wrong_dimension');
    expect(m.observeVector(new Float64Array([1]), 2, 1, 1)).toBe('wrong_dimension');
    expect(m.observeVector(new Float64Array([Number.NaN, 1]), 2, 1, 1)).toBe('not_finite');
    expect(m.observeVector(new Float64Array([1, Infinity]), 2, 1, 1)).toBe('not_finite');
    expect(m.eventsAccepted).toBe(1);
    expect(m.dimension).toBe(2);
    const first = new VectorStreamMonitor('req', monitorConfig(), () => {});
    expect(first.observeVector(x, 0, 0, 0)).toBe('wrong_dimension');
    expect(first.dimension).toBe(0);
  });

  it('works in 4 dimensions: silent while stationary, then a new mode emerges', () => {
    // Invented 4-D stream: two clusters with a shared correlation; a 2 % cluster appears at CHANGE.
    const rng = new Random(9);
    const transitions: AlertTransition[] = [];
    const m = new VectorStreamMonitor('req4', monitorConfig(), (t) => transitions.push(t));
    const x = new Float64Array(4);
    const centres = [
      [10, 20, 30, 40],
      [30, 10, 50, 20],
      [60, 60, 0, 0],
    ];
    for (let i = 0; i < 26_000; i++) {
      const u = rng.uniform();
      const c = i >= CHANGE && u < 0.02 ? 2 : u < 0.6 ? 0 : 1;
      const common = rng.normal();
      for (let a = 0; a < 4; a++) x[a] = centres[c][a] + 2 * (0.6 * common + 0.8 * rng.normal());
      expect(m.observeVector(x, 4, i, i)).toBe(null);
    }
    const a = firstFiring(transitions);
    expect(a.kind).toBe('mode_emerged');
    expect(a.offset - CHANGE).toBeLessThan(1500);
    const born = m.vectorViews(m.current).find((c) => c.id === a.evidence.componentId);
    expect(born?.mean.map((v) => Math.round(v / 5) * 5)).toEqual([60, 60, 0, 0]);
  });

  it('checkpoint and resume at several points continue bit for bit', () => {
    const total = 21_500;
    const reference: AlertTransition[] = [];
    const whole = new VectorStreamMonitor('req', monitorConfig(), (t) => reference.push(t));
    const events: Float64Array[] = [];
    simulate2d(total, 5, SCENARIOS.emerged, (x) => events.push(Float64Array.from(x)));
    events.forEach((x, i) => whole.observeVector(x, 2, 1.7e12 + 10 * i, i));
    expect(reference.some((t) => t.kind === 'mode_emerged')).toBe(true);

    // Cuts: during bootstrap, warm-up, armed and quiet, and while the new mode is being collected and confirmed.
    const cuts = new Set([400, 2500, 12_000, 20_100, 20_200, 20_260, 20_300, 21_000]);
    const resumed: AlertTransition[] = [];
    const listener = (t: AlertTransition) => resumed.push(t);
    let m = new VectorStreamMonitor('req', monitorConfig(), listener);
    events.forEach((x, i) => {
      if (cuts.has(i)) {
        const state = JSON.parse(JSON.stringify(m.exportState())) as VectorMonitorState;
        m = VectorStreamMonitor.importState(state, monitorConfig(), listener);
      }
      m.observeVector(x, 2, 1.7e12 + 10 * i, i);
    });
    expect(resumed).toEqual(reference);
    expect(JSON.stringify(m.exportState())).toBe(JSON.stringify(whole.exportState()));
    expect(m.vectorViews(m.current)).toEqual(whole.vectorViews(whole.current));
  });

  it('a state saved by version 1 (statistics as S, nine constants per component) resumes to the same alerts', () => {
    const total = 21_500;
    const events: Float64Array[] = [];
    simulate2d(total, 5, SCENARIOS.emerged, (x) => events.push(Float64Array.from(x)));
    const reference: AlertTransition[] = [];
    const whole = new VectorStreamMonitor('req', monitorConfig(), (t) => reference.push(t));
    events.forEach((x, i) => whole.observeVector(x, 2, 1.7e12 + 10 * i, i));
    const resumed: AlertTransition[] = [];
    const listener = (t: AlertTransition) => resumed.push(t);
    let m = new VectorStreamMonitor('req', monitorConfig(), listener);
    events.forEach((x, i) => {
      if (i === 20_200) {
        const now = JSON.parse(JSON.stringify(m.exportState())) as VectorMonitorState;
        expect(now.version).toBe(2);
        const consts: number[] = [];
        for (let j = 0; j < now.consts.length; j += 6) consts.push(...now.consts.slice(j, j + 6), Math.log(now.consts[j + 1]), Math.log(now.consts[j + 3]), Math.log(now.consts[j + 5]));
        const old = { ...now, version: 1 as const, shifts: now.shifts.map((v, n) => (n % 3 === 0 ? Math.log(v) : v)), consts };
        m = VectorStreamMonitor.importState(old, monitorConfig(), listener);
      }
      m.observeVector(x, 2, 1.7e12 + 10 * i, i);
    });
    expect(reference.some((t) => t.kind === 'mode_emerged')).toBe(true);
    expect(resumed.map((t) => [t.kind, t.state, t.offset])).toEqual(reference.map((t) => [t.kind, t.state, t.offset]));
  });

  it('rebaseline resolves firing alerts and the reference takes the current model', () => {
    const { transitions, monitor } = run('vanished', 22_000);
    expect(monitor.alerts().some((a) => a.state === 'firing')).toBe(true);
    monitor.rebaseline();
    expect(transitions.at(-1)?.resolution).toBe('rebaselined');
    expect(monitor.alerts()).toEqual([]);
    expect(monitor.reference?.k).toBe(monitor.current?.k);
  });
});
