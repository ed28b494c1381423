import { mkdtemp, readFile, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Writable } from 'node:stream';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { runReplay } from '../../src/cli/replay.js';
import { Random } from '../../src/math/random.js';
import { simulate } from '../../src/simulate/generator.js';
import { buildScenario } from '../../src/simulate/suite.js';

class Lines extends Writable {
  text = '';
  override _write(c: Buffer | string, _e: BufferEncoding, cb: () => void): void {
    this.text += c.toString();
    cb();
  }
  records(): Record<string, unknown>[] {
    return this.text.split('\n').filter((l) => l.length > 0).map((l) => JSON.parse(l) as Record<string, unknown>);
  }
}

let dir = '';
beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'modewatch-replay-'));
});
afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

async function scenarioFile(name: string, events: number, seed: number) {
  const sim = simulate(buildScenario(name, { events }), seed);
  const recs = [...sim.records()];
  const path = join(dir, `${name}-${seed}.ndjson`);
  await writeFile(path, recs.map((r) => r.line).join('\n') + '\n');
  return { path, recs, truth: sim.truth() };
}

describe('modewatch replay', () => {
  it('prints one record per transition whose offset is the line that caused it, counting bad lines', async () => {
    const { path, recs, truth } = await scenarioFile('latency-new-slow-mode', 12_000, 1);
    // Put bad lines in front: every offset after them moves by exactly that many.
    const bad = ['not json', '{"ts":1,"stream":"checkout-latency-ms","value":"NaN"}', '{"ts":1,"stream":"checkout-latency-ms"}', '{"ts":1,"stream":"checkout-latency-ms","value":-5}'];
    const shifted = join(dir, 'shifted.ndjson');
    await writeFile(shifted, bad.join('\n') + '\n' + (await readFile(path, 'utf8')));
    const a = new Lines();
    const b = new Lines();
    const sa = await runReplay({ files: [path], scale: 'log' }, a);
    const sb = await runReplay({ files: [shifted], scale: 'log' }, b);
    const ra = a.records();
    const rb = b.records();
    expect(ra.length).toBeGreaterThan(0);
    expect(rb.map((r) => r.offset)).toEqual(ra.map((r) => (r.offset as number) + bad.length));
    expect(rb.map((r) => r.kind)).toEqual(ra.map((r) => r.kind));
    const first = ra[0];
    expect(first).toMatchObject({ kind: 'mode_emerged', state: 'firing', stream: 'checkout-latency-ms' });
    expect(recs[first.offset as number].stream).toBe('checkout-latency-ms');
    expect(first.offset as number).toBeGreaterThanOrEqual(truth.changes[0].offset);
    expect(sb.records).toBe(sa.records + 4);
    expect(sb.rejected).toEqual({ missing_field: 1, out_of_domain: 1, unparseable: 1, wrong_type: 1 });
    expect(sb.finalComponents['checkout-latency-ms'].current.length).toBe(3);
  });

  it('reads CSV with a ts,stream,value header and RFC 3339 times, and continues offsets across files', async () => {
    const rows = ['ts,stream,value'];
    for (let i = 0; i < 3000; i++) rows.push(`${new Date(Date.UTC(2026, 0, 1) + i * 1000).toISOString()},payload,${100 + (i % 13)}`);
    const csv = join(dir, 'a.csv');
    await writeFile(csv, rows.join('\n') + '\n');
    const out = new Lines();
    const s = await runReplay({ files: [csv, csv] }, out);
    expect(s.records).toBe(6002);
    expect(s.accepted).toBe(6000);
    expect(s.streams).toBe(1);
    expect(s.finalComponents.payload.events).toBe(6000);
  });

  it('refuses streams over the cap and counts them', async () => {
    const lines: string[] = [];
    for (let i = 0; i < 100; i++) lines.push(JSON.stringify({ ts: i, stream: `s${i % 10}`, value: i }));
    const path = join(dir, 'many.ndjson');
    await writeFile(path, lines.join('\n'));
    const s = await runReplay({ files: [path], maxStreams: 4 }, new Lines());
    expect(s.streams).toBe(4);
    expect(s.rejected.stream_limit).toBe(60);
  });

  it('gives the same output whatever the file is split into', async () => {
    const { path } = await scenarioFile('latency-weight-shift', 12_000, 3);
    const text = (await readFile(path, 'utf8')).trimEnd().split('\n');
    const p1 = join(dir, 'part1.ndjson');
    const p2 = join(dir, 'part2.ndjson');
    await writeFile(p1, text.slice(0, 7001).join('\n') + '\n');
    await writeFile(p2, text.slice(7001).join('\n') + '\n');
    const whole = new Lines();
    const parts = new Lines();
    await runReplay({ files: [path] }, whole);
    await runReplay({ files: [p1, p2] }, parts);
    const strip = (r: Record<string, unknown>) => ({ ...r, file: undefined });
    expect(parts.records().map(strip)).toEqual(whole.records().map(strip));
  });

  it('models a stream of vectors with the vector monitor, and refuses numbers on it', async () => {
    // An invented stream of (latency ms, size KB) pairs from two clusters.
    const rng = new Random(3);
    const lines: string[] = [];
    for (let i = 0; i < 6000; i++) {
      const fast = rng.uniform() < 0.7;
      const v = fast ? [40 + 4 * rng.normal(), 2 + 0.3 * rng.normal()] : [180 + 15 * rng.normal(), 9 + 1 * rng.normal()];
      lines.push(JSON.stringify({ ts: 1000 * i, stream: 'pairs', value: v }));
    }
    lines.push(JSON.stringify({ ts: 0, stream: 'pairs', value: 5 }));
    const path = join(dir, 'pairs.ndjson');
    await writeFile(path, lines.join('\n') + '\n');
    const s = await runReplay({ files: [path] }, new Lines());
    expect(s.accepted).toBe(6000);
    expect(s.rejected).toEqual({ wrong_dimension: 1 });
    const c = s.finalComponents.pairs;
    expect(c.state).toBe('armed');
    expect(c.current.length).toBe(2);
    // Read-outs are the first axis: the two cluster means, with their weights.
    expect(c.current[0].location).toBeCloseTo(40, 0);
    expect(c.current[1].location).toBeGreaterThan(170);
    expect(c.current[0].weight).toBeGreaterThan(0.6);
  });
});
