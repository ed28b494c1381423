import { describe, expect, it } from 'vitest';
import type { AlertTransition } from '../../src/detect/alert.js';
import { monitorConfig } from '../../src/detect/monitor-config.js';
import { VectorStreamMonitor, type VectorMonitorState } from '../../src/detect/vector-monitor.js';
import { FAST, SLOW, simulate2d, type Cluster } from './vector-sim.js';

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

function run(name: string, events: number, seed = 1, outliers = 0) {
  const transitions: AlertTransition[] = [];
  const monitor = new VectorStreamMonitor('req', monitorConfig(), (t) => transitions.push(t));
  simulate2d(events, seed, SCENARIOS[name], (x, i) => expect(monitor.observeVector(x, 2, 1.7e12 + 10 * i, i)).toBe(null), outliers);
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
    const { transitions, monitor } = run('location', 24_000);
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

  it('rebaseline resolves firing alerts and the reference takes the current model', () => {
    const { transitions, monitor } = run('vanished', 22_000);
    expect(monitor.alerts().some((a) => a.state === 'firing')).toBe(true);
    monitor.rebaseline();
    expect(transitions.at(-1)?.resolution).toBe('rebaselined');
    expect(monitor.alerts()).toEqual([]);
    expect(monitor.reference?.k).toBe(monitor.current?.k);
  });
});
