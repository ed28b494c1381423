import { describe, expect, it } from 'vitest';
import type { AlertTransition } from '../../src/detect/alert.js';
import { monitorConfig, validateMonitorConfig } from '../../src/detect/monitor-config.js';
import { StreamMonitor, type MonitorState } from '../../src/detect/stream-monitor.js';
import { simulate } from '../../src/simulate/generator.js';
import { buildScenario } from '../../src/simulate/suite.js';

/** Feeds a built-in (invented) scenario through one monitor; returns transitions and the change's truth. */
function run(name: string, events = 20_000, seed = 1, overrides = {}) {
  const sim = simulate(buildScenario(name, { events }), seed);
  const transitions: AlertTransition[] = [];
  const monitor = new StreamMonitor('s', monitorConfig(overrides), (t) => transitions.push(t));
  for (const r of sim.records()) if (r.bad === null) monitor.observe(r.value, r.ts, r.offset);
  return { transitions, truth: sim.truth(), monitor };
}

describe('stream monitor on simulated scenarios', () => {
  const cases: [string, string][] = [
    ['latency-new-slow-mode', 'mode_emerged'],
    ['latency-mode-in-gap', 'mode_emerged'],
    ['latency-mode-vanishes', 'mode_vanished'],
    ['latency-weight-shift', 'weight_shift'],
    ['latency-location-shift', 'location_shift'],
  ];
  for (const [name, kind] of cases) {
    it(`${name}: fires ${kind} soon after the change and nothing before it`, () => {
      const { transitions, truth } = run(name);
      const change = truth.changes[0];
      const firing = transitions.filter((t) => t.state === 'firing');
      expect(firing.filter((t) => t.offset < change.offset)).toEqual([]);
      expect(firing.length).toBeGreaterThan(0);
      expect(firing[0].kind).toBe(kind);
      // Within 1 000 events of the change (the benchmark measures the delay against the oracle CUSUM).
      expect(firing[0].offset - change.offset).toBeLessThan(1000);
      // Evidence: the statistic crossed its threshold, and first evidence is at or after the change.
      expect(firing[0].evidence.value).toBeGreaterThanOrEqual(firing[0].evidence.threshold);
      expect(firing[0].evidence.firstEvidenceOffset).toBeGreaterThanOrEqual(change.offset - 50);
      expect(firing[0].evidence.before.length).toBeGreaterThan(0);
      expect(firing[0].evidence.after.length).toBeGreaterThan(0);
    });
  }

  it('a new mode is reported near its true location, with a new stable id', () => {
    const { transitions, monitor } = run('latency-new-slow-mode');
    const a = transitions.find((t) => t.kind === 'mode_emerged' && t.state === 'firing');
    expect(a).toBeDefined();
    const id = a?.evidence.componentId ?? -1;
    const before = a?.evidence.before.map((c) => c.id) ?? [];
    expect(before).not.toContain(id);
    const born = monitor.views(monitor.current).find((c) => c.id === id);
    expect(born).toBeDefined();
    expect(born?.location).toBeGreaterThan(700);
    expect(born?.location).toBeLessThan(1200);
    expect(born?.weight).toBeGreaterThan(0.015);
    expect(born?.weight).toBeLessThan(0.05);
  });

  it('stays silent on 100 000 stationary events with scattered outliers', () => {
    const { transitions, monitor } = run('latency-stationary-outliers', 100_000);
    expect(transitions).toEqual([]);
    expect(monitor.state).toBe('armed');
    expect(monitor.current?.k).toBe(2);
  });

  it('absorbs a persistent change: the alert resolves as absorbed and the reference takes the new normal', () => {
    const { transitions, monitor } = run('latency-weight-shift', 30_000, 2, { absorbAfterEvents: 5000 });
    const resolved = transitions.find((t) => t.state === 'resolved');
    expect(resolved?.resolution).toBe('absorbed');
    const w = monitor.views(monitor.reference).map((c) => c.weight).sort();
    expect(w[0]).toBeGreaterThan(0.33);
    expect(monitor.alerts()).toEqual([]);
  });

  it('an operator re-baseline resolves firing alerts as rebaselined', () => {
    const { transitions, monitor } = run('latency-location-shift', 12_000);
    expect(monitor.alerts().length).toBeGreaterThan(0);
    monitor.rebaseline();
    expect(transitions.at(-1)?.resolution).toBe('rebaselined');
    expect(monitor.alerts()).toEqual([]);
  });

  it('known components declared in the configuration are the reference, never learned', () => {
    const known = [
      { weight: 0.8, family: 'lognormal' as const, location: 40, spread: 0.25 },
      { weight: 0.2, family: 'lognormal' as const, location: 180, spread: 0.3 },
    ];
    const cfg = monitorConfig({ known, scale: 'log' });
    expect(validateMonitorConfig(cfg)).toEqual([]);
    const transitions: AlertTransition[] = [];
    const m = new StreamMonitor('k', cfg, (t) => transitions.push(t));
    expect(m.state).toBe('warmup');
    const sim = simulate(buildScenario('latency-weight-shift', { events: 12_000 }), 4);
    for (const r of sim.records()) if (r.bad === null) m.observe(r.value, r.ts, r.offset);
    expect(m.views(m.reference).map((c) => c.weight)).toEqual([0.8, 0.2]);
    expect(transitions.some((t) => t.kind === 'weight_shift' && t.state === 'firing')).toBe(true);
  });

  it('bad values are rejected with a reason and never reach the models', () => {
    const m = new StreamMonitor('b', monitorConfig({ scale: 'log', bootstrapEvents: 50, warmupEvents: 100 }), () => {});
    expect(m.observe(Number.NaN, 0, 0)).toBe('not_finite');
    expect(m.observe(-1, 0, 1)).toBe('out_of_domain');
    expect(m.observe(0, 0, 2)).toBe('out_of_domain');
    for (let i = 0; i < 200; i++) expect(m.observe(10 + (i % 7), i, i)).toBeNull();
    expect(m.observe(Infinity, 0, 300)).toBe('not_finite');
    expect(m.eventsAccepted).toBe(200);
  });

  it('config validation names the key and what is wrong', () => {
    const problems = validateMonitorConfig(monitorConfig({ threshold: -1, currentWindow: 50_000, scale: 'sqrt' as never }));
    expect(problems.map((p) => p.key).sort()).toEqual(['currentWindow', 'scale', 'threshold']);
    expect(problems.find((p) => p.key === 'currentWindow')?.message).toMatch(/smaller than referenceWindow/);
  });
});

describe('determinism', () => {
  it('a checkpoint and resume at any point gives bit-identical state and the same alerts', () => {
    const sim = simulate(buildScenario('latency-new-slow-mode', { events: 16_000 }), 5);
    const records = [...sim.records()].filter((r) => r.bad === null);
    const cfg = monitorConfig();
    const a: AlertTransition[] = [];
    const straight = new StreamMonitor('s', cfg, (t) => a.push(t));
    for (const r of records) straight.observe(r.value, r.ts, r.offset);

    const b: AlertTransition[] = [];
    let resumed = new StreamMonitor('s', cfg, (t) => b.push(t));
    const cuts = new Set([500, 999, 1000, 2999, 3000, 7777, 8050, 8100, 12_345]);
    records.forEach((r, i) => {
      resumed.observe(r.value, r.ts, r.offset);
      if (cuts.has(i)) resumed = StreamMonitor.importState(JSON.parse(JSON.stringify(resumed.exportState())), cfg, (t) => b.push(t));
    });
    expect(JSON.stringify(resumed.exportState())).toBe(JSON.stringify(straight.exportState()));
    expect(b).toEqual(a);
    expect(a.length).toBeGreaterThan(0);
  });

  it('a state saved by version 1 (statistics as S, nine constants per component) resumes to the same alerts', () => {
    const sim = simulate(buildScenario('latency-weight-shift', { events: 16_000 }), 3);
    const records = [...sim.records()].filter((r) => r.bad === null);
    const cfg = monitorConfig();
    const a: AlertTransition[] = [];
    const straight = new StreamMonitor('s', cfg, (t) => a.push(t));
    const b: AlertTransition[] = [];
    let resumed = new StreamMonitor('s', cfg, (t) => b.push(t));
    const cut = records.findIndex((r) => r.offset >= sim.truth().changes[0].offset + 100);
    records.forEach((r, i) => {
      straight.observe(r.value, r.ts, r.offset);
      resumed.observe(r.value, r.ts, r.offset);
      if (i !== cut) return;
      const now: MonitorState = JSON.parse(JSON.stringify(resumed.exportState()));
      expect(now.version).toBe(2);
      // Version 1 saved S = ln R, and after each component's six weight constants the logs of the three b's.
      const consts: number[] = [];
      for (let j = 0; j < now.consts.length; j += 6) consts.push(...now.consts.slice(j, j + 6), Math.log(now.consts[j + 1]), Math.log(now.consts[j + 3]), Math.log(now.consts[j + 5]));
      const old = { ...now, version: 1 as const, shifts: now.shifts.map((x, n) => (n % 3 === 0 ? Math.log(x) : x)), consts };
      resumed = StreamMonitor.importState(old, cfg, (t) => b.push(t));
    });
    expect(cut).toBeGreaterThan(0);
    expect(a.some((t) => t.state === 'firing' && t.kind === 'weight_shift')).toBe(true);
    expect(b.map((t) => [t.kind, t.state, t.offset])).toEqual(a.map((t) => [t.kind, t.state, t.offset]));
    expect(() => StreamMonitor.importState({ ...straight.exportState(), version: 7 as 2 }, cfg, () => {})).toThrow(/version 7 is not supported/);
  });
});
