import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Writable } from 'node:stream';
import { afterAll, describe, expect, it } from 'vitest';
import { runSimulate } from '../src/cli/simulate-command.js';
import { EventSlot } from '../src/ingest/event.js';
import { forEachLine } from '../src/ingest/line-reader.js';
import { decodeNdjsonLine } from '../src/ingest/records.js';
import { componentLogPdf, mixtureLogPdf } from '../src/simulate/families.js';
import { simulate, type GroundTruth, type SimRecord } from '../src/simulate/generator.js';
import { parseScenario, type Scenario } from '../src/simulate/scenario.js';
import { SCENARIO_NAMES, buildScenario } from '../src/simulate/suite.js';

const dir = mkdtempSync(join(tmpdir(), 'modewatch-simulate-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

function all(s: Scenario, seed: number): { records: SimRecord[]; truth: GroundTruth } {
  const run = simulate(s, seed);
  const records = [...run.records()];
  return { records, truth: run.truth() };
}

describe('simulator', () => {
  it('is deterministic for a seed and differs between seeds', () => {
    const s = buildScenario('latency-bad-input', { events: 3000 });
    const a = all(s, 9);
    const b = all(s, 9);
    const c = all(s, 10);
    expect(a.records.map((r) => r.line)).toEqual(b.records.map((r) => r.line));
    expect(a.truth).toEqual(b.truth);
    expect(c.records.map((r) => r.line)).not.toEqual(a.records.map((r) => r.line));
  });

  it('interleaves streams by event time with consecutive offsets', () => {
    const { records, truth } = all(buildScenario('latency-bad-input', { events: 2000 }), 3);
    expect(truth.streams.map((s) => s.events)).toEqual([2000, 2000]);
    expect(truth.lines).toBe(records.length);
    expect(truth.events + truth.badLines).toBe(records.length);
    for (let i = 0; i < records.length; i++) {
      expect(records[i].offset).toBe(i);
      if (i > 0) expect(records[i].ts).toBeGreaterThanOrEqual(records[i - 1].ts);
    }
    // Both streams appear throughout, not one after the other.
    const firstHalf = new Set(records.slice(0, records.length / 2).map((r) => r.stream));
    expect(firstHalf.size).toBe(2);
  });

  it('every built-in scenario builds, runs and describes itself as invented', () => {
    for (const name of SCENARIO_NAMES) {
      const s = buildScenario(name, { events: 400 });
      expect(s.description).toMatch(/invented/i);
      const { records, truth } = all(s, 1);
      expect(truth.events).toBe(400 * s.streams.length);
      expect(records.length).toBe(truth.lines);
      const changes = s.streams.flatMap((st) => st.changes.filter((c) => c.kind !== 'outliers' && c.kind !== 'badLines'));
      expect(truth.changes.length).toBe(changes.length);
    }
  });

  it('ground-truth offsets point exactly at the first changed event', () => {
    for (const name of ['latency-new-slow-mode', 'latency-mode-vanishes', 'latency-weight-shift', 'latency-location-shift', 'latency-drift', 'payload-size-shift']) {
      const { records, truth } = all(buildScenario(name, { events: 5000, changeAt: 3210 }), 4);
      expect(truth.changes.length).toBe(1);
      const ch = truth.changes[0];
      expect(ch.eventIndex).toBe(3210);
      const r = records[ch.offset];
      expect(r.stream).toBe(ch.stream);
      expect(r.eventIndex).toBe(3210);
      expect(r.bad).toBeNull();
      expect(r.ts).toBe(ch.ts);
      // No record of that stream before the offset has reached the change index.
      expect(records.slice(0, ch.offset).some((x) => x.stream === ch.stream && x.eventIndex >= 3210 && x.bad === null)).toBe(false);
    }
  });

  it('records the pre- and post-change mixtures an oracle CUSUM needs', () => {
    const { records, truth } = all(buildScenario('latency-new-slow-mode', { events: 60_000, changeAt: 20_000 }), 8);
    const ch = truth.changes[0];
    expect(ch.kind).toBe('mode_emerged');
    expect(ch.pre.weights).toEqual([0.8, 0.2]);
    expect(ch.post.weights.map((w) => +w.toFixed(6))).toEqual([0.776, 0.194, 0.03]);
    expect(ch.component).toBe(2);
    // After the change, log p_post(x) - log p_pre(x) has a positive mean (the KL divergence); before, negative.
    let before = 0;
    let after = 0;
    let nb = 0;
    let na = 0;
    for (const r of records) {
      const llr = mixtureLogPdf(ch.post, r.value) - mixtureLogPdf(ch.pre, r.value);
      if (r.offset < ch.offset) {
        before += llr;
        nb++;
      } else {
        after += llr;
        na++;
      }
    }
    expect(after / na).toBeGreaterThan(0.05);
    expect(before / nb).toBeLessThan(0);
    // The new mode near 900 ms carries about 3% of the events after the change, none before.
    const slow = (rs: SimRecord[]) => rs.filter((r) => r.value > 600).length / rs.length;
    expect(slow(records.slice(0, ch.offset))).toBeLessThan(0.001);
    expect(slow(records.slice(ch.offset))).toBeGreaterThan(0.025);
    expect(slow(records.slice(ch.offset))).toBeLessThan(0.035);
  });

  it('drifts gradually to the target location, and shifts at once', () => {
    const events = 40_000;
    const { records, truth } = all(buildScenario('latency-drift', { events, changeAt: 10_000 }), 2);
    const ch = truth.changes[0];
    expect(ch.kind).toBe('location_shift');
    expect(ch.gradualOver).toBe(10_000);
    const target = Math.log(40) + 0.5;
    expect(ch.post.components[0]).toMatchObject({ family: 'lognormal', meanlog: target });
    expect(truth.streams[0].final.components[0]).toMatchObject({ meanlog: target });
    // Median of the fast mode (values below 100 ms) in windows: before, mid-drift, after.
    const median = (a: number, b: number) => {
      const v = records.slice(a, b).map((r) => r.value).filter((x) => x < 100 || a >= 20_000).sort((x, y) => x - y);
      return v[Math.floor(v.length * 0.4)];
    };
    const m0 = median(0, 10_000);
    const m1 = median(14_000, 16_000);
    const m2 = median(30_000, 40_000);
    expect(m0).toBeLessThan(m1);
    expect(m1).toBeLessThan(m2);
  });

  it('counts outliers and bad lines, and the decoder rejects each bad line as the truth says', () => {
    const { records, truth } = all(buildScenario('latency-bad-input', { events: 30_000 }), 6);
    expect(truth.badLines).toBeGreaterThan(60);
    expect(truth.outliers).toBeGreaterThan(10);
    const byKind = new Map<string, number>();
    const slot = new EventSlot();
    let negatives = 0;
    const mismatches: string[] = [];
    for (const r of records) {
      const reason = decodeNdjsonLine(r.line, slot);
      if (r.bad === null) {
        if (reason !== null || slot.value !== r.value || slot.stream !== r.stream || slot.ts !== r.ts) mismatches.push(r.line);
        continue;
      }
      const expected = truth.badLineExpectedRejection[r.bad];
      if (expected === 'out_of_domain') {
        if (reason !== null || !(slot.value < 0)) mismatches.push(r.line);
        negatives++;
      } else if (reason !== expected) mismatches.push(`${r.line} -> ${reason}, expected ${expected}`);
      byKind.set(r.bad, (byKind.get(r.bad) ?? 0) + 1);
    }
    expect(mismatches).toEqual([]);
    for (const s of truth.streams) for (const n of Object.values(s.badLines)) expect(n).toBeGreaterThan(0);
    const totals = Object.fromEntries([...byKind.entries()].sort());
    const fromTruth: Record<string, number> = {};
    for (const s of truth.streams) for (const [k, n] of Object.entries(s.badLines)) fromTruth[k] = (fromTruth[k] ?? 0) + n;
    expect(totals).toEqual(Object.fromEntries(Object.entries(fromTruth).sort()));
    expect(negatives).toBe(fromTruth.negative_value);
    expect(records.filter((r) => r.outlier).length).toBe(truth.outliers);
  });

  it('the same stream draws the same values whatever other streams or noise exist (per-stream generators)', () => {
    const base = buildScenario('latency-stationary', { events: 1000 });
    const noisy = buildScenario('latency-stationary', { events: 1000 });
    noisy.streams[0].changes.push({ kind: 'badLines', at: 0, until: 1000, fraction: 0.1 });
    const a = all(base, 5).records.map((r) => r.value);
    const b = all(noisy, 5).records.filter((r) => r.bad === null).map((r) => r.value);
    expect(b).toEqual(a);
  });
});

describe('scenario files', () => {
  const good = {
    name: 'two-streams',
    description: 'Invented test scenario',
    streams: [
      {
        name: 'a',
        start: '2024-05-01T00:00:00Z',
        rate: 10,
        gaps: 'fixed',
        count: 100,
        initial: { weights: [3, 1], components: [{ family: 'normal', mean: 10, sd: 1 }, { family: 'normal', mean: 20, sd: 1 }] },
        changes: [
          { kind: 'vanish', at: 60, component: 0 },
          { kind: 'appear', at: 50, weight: 0.5, component: { family: 'gamma', shape: 2, scale: 3 } },
          { kind: 'shift', at: 70, component: 1, to: 5 },
        ],
      },
    ],
  };

  it('validates in time order so component indices refer to the list at that point', () => {
    const s = parseScenario(good, 'f.yaml');
    expect(s.streams[0].initial.weights).toEqual([0.75, 0.25]);
    expect(s.streams[0].start).toBe(Date.UTC(2024, 4, 1));
    const { records, truth } = all(s, 1);
    expect(truth.changes.map((c) => [c.kind, c.eventIndex, c.offset])).toEqual([
      ['mode_emerged', 50, 50],
      ['mode_vanished', 60, 60],
      ['location_shift', 70, 70],
    ]);
    // Fixed gaps at 10 events/s: 100 ms apart.
    expect(records[1].ts - records[0].ts).toBe(100);
    expect(truth.changes[2].post.components[1]).toEqual({ family: 'gamma', shape: 2, scale: 5 });
  });

  const bad: [(s: typeof good) => void, RegExp][] = [
    [(s) => ((s.streams[0].initial.components[0] as { family: string }).family = 'cauchy'), /f\.yaml: streams\[0\]\.initial\.components\[0\]\.family: expected one of normal, lognormal, gamma, pareto/],
    [(s) => ((s.streams[0].initial.components[1] as { sd: number }).sd = -1), /streams\[0\]\.initial\.components\[1\]\.sd: must be > 0/],
    [(s) => (s.streams[0].initial.weights = [1]), /streams\[0\]\.initial\.weights: expected 2 weights/],
    [(s) => ((s.streams[0].changes[0] as { component: number }).component = 3), /streams\[0\]\.changes\[0\]\.component: no component 3 at that point \(the stream has 3/],
    [(s) => ((s.streams[0].changes[2] as { at: number }).at = 100), /streams\[0\]\.changes\[2\]\.at: is beyond the stream's 100 events/],
    [(s) => ((s.streams[0].changes[1] as { kind: string }).kind = 'explode'), /changes\[1\]\.kind: expected one of appear/],
    [(s) => ((s.streams[0] as { rate: unknown }).rate = 'fast'), /streams\[0\]\.rate: expected a finite number/],
    [(s) => ((s.streams[0] as { start: unknown }).start = 'tuesday'), /streams\[0\]\.start: expected epoch milliseconds or an RFC 3339/],
    [(s) => ((s.streams[0] as Record<string, unknown>).colour = 'red'), /streams\[0\]\.colour: unknown key/],
    [(s) => s.streams.push({ ...s.streams[0] }), /streams\[1\]\.name: duplicate stream name "a"/],
  ];
  it.each(bad.map((b, i) => [i, ...b] as const))('rejects case %i with a message naming the key', (_i, mutate, message) => {
    const s = structuredClone(good);
    mutate(s);
    expect(() => parseScenario(s, 'f.yaml')).toThrow(message);
  });

  it('rejects negative_value bad lines on a stream that may be negative', () => {
    const s = structuredClone(good);
    (s.streams[0].changes as unknown[]).push({ kind: 'badLines', at: 0, until: 10, fraction: 0.5, kinds: ['negative_value'] });
    expect(() => parseScenario(s, 'f.yaml')).toThrow(/kinds\[0\]: negative_value needs a stream whose components are all positive/);
  });
});

class Sink extends Writable {
  text = '';
  override _write(chunk: Buffer, _enc: BufferEncoding, cb: () => void): void {
    this.text += chunk.toString();
    cb();
  }
}

describe('modewatch simulate (command)', () => {
  it('writes records and truth files that a file replay can read back', async () => {
    const out = join(dir, 'records.ndjson');
    const truthFile = join(dir, 'truth.json');
    const truth = await runSimulate({ scenario: 'latency-weight-shift', events: 3000, seed: 12, out, truth: truthFile });
    expect(truth).not.toBeNull();
    const saved = JSON.parse(readFileSync(truthFile, 'utf8')) as GroundTruth;
    expect(saved.changes[0].offset).toBe(truth?.changes[0].offset);
    const slot = new EventSlot();
    let accepted = 0;
    let changedAt = -1;
    const counts = await forEachLine(out, (text, s, e, index) => {
      expect(decodeNdjsonLine(text.slice(s, e), slot)).toBeNull();
      accepted++;
      if (index === saved.changes[0].offset) changedAt = index;
    });
    expect(counts.lines).toBe(3000);
    expect(accepted).toBe(3000);
    expect(changedAt).toBe(1500);
  });

  it('writes to a given stream, reads YAML scenario files, and lists the suite', async () => {
    const yamlFile = join(dir, 'scenario.yaml');
    writeFileSync(
      yamlFile,
      `# Invented
name: tiny
streams:
  - name: x
    rate: 5
    count: 10
    initial: { weights: [1], components: [{ family: pareto, scale: 1, shape: 3 }] }
`,
    );
    const sink = new Sink();
    const truth = await runSimulate({ scenarioFile: yamlFile, seed: 1 }, sink);
    expect(sink.text.trim().split('\n')).toHaveLength(10);
    expect(truth?.scenario).toBe('tiny');
    const more = new Sink();
    await runSimulate({ scenarioFile: yamlFile, seed: 1, events: 25 }, more);
    expect(more.text.trim().split('\n')).toHaveLength(25);
    const list = new Sink();
    await runSimulate({ list: true, seed: 1 }, list);
    for (const n of SCENARIO_NAMES) expect(list.text).toContain(n);
  });

  it('says what is wrong with the flags or files', async () => {
    await expect(runSimulate({ seed: 1 })).rejects.toThrow(/exactly one of --scenario NAME .* or --scenario-file FILE/);
    await expect(runSimulate({ scenario: 'nope', seed: 1 })).rejects.toThrow(/--scenario: unknown scenario "nope"; built-in: latency-stationary/);
    await expect(runSimulate({ scenario: 'latency-drift', seed: 1, events: 100, changeAt: 100 })).rejects.toThrow(/changeAt must be an integer in \[0, 100\)/);
    await expect(runSimulate({ scenario: 'latency-drift', seed: -1 })).rejects.toThrow(/--seed must be an integer/);
    await expect(runSimulate({ scenarioFile: join(dir, 'missing.yaml'), seed: 1 })).rejects.toThrow(/cannot read scenario file .*missing\.yaml: ENOENT/);
    const broken = join(dir, 'broken.json');
    writeFileSync(broken, '{"streams": [');
    await expect(runSimulate({ scenarioFile: broken, seed: 1 })).rejects.toThrow(/broken\.json is not valid JSON/);
    const wrong = join(dir, 'wrong.yaml');
    writeFileSync(wrong, 'streams:\n  - name: x\n    rate: 5\n    count: 10\n    initial: { weights: [1], components: [{ family: normal, mean: 1 }] }\n');
    await expect(runSimulate({ scenarioFile: wrong, seed: 1 })).rejects.toThrow(/wrong\.yaml: streams\[0\]\.initial\.components\[0\]\.sd: missing/);
    await expect(runSimulate({ scenario: 'latency-drift', seed: 1, events: 10, out: join(dir, 'no', 'such', 'dir.ndjson') })).rejects.toThrow(/cannot write --out/);
  });

  it('logpdf of written values is finite under the mixture that produced them', () => {
    const { records, truth } = all(buildScenario('payload-size-shift', { events: 2000 }), 3);
    const m = truth.streams[0].initial;
    for (const r of records.slice(0, 1000)) expect(Number.isFinite(mixtureLogPdf(m, r.value))).toBe(true);
    expect(componentLogPdf(m.components[2], 19_999)).toBe(-Infinity);
  });
});
