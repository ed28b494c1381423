/**
 * Detection benchmark: `npm run bench:detect`. Runs `replay` (the daemon's own pipeline) over the
 * built-in simulated scenarios and prints, per scenario, the detection delay in events after the
 * change, the kind detected, and the delay of the oracle CUSUM on the same records (the CUSUM that
 * knows the true pre- and post-change densities, threshold ln 10^6; Page 1954, Lorden 1971), plus
 * false alarms on 2 million stationary events with and without scattered outliers, the current
 * model's accuracy on a stationary stream, and replay throughput. One JSON line per figure.
 *
 * Options (environment): BENCH_STATIONARY_EVENTS (default 2 000 000), BENCH_SEEDS (default 5).
 */
import { createWriteStream } from 'node:fs';
import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Writable } from 'node:stream';
import { once } from 'node:events';
import { runReplay, type ReplaySummary } from '../cli/replay.js';
import { buildScenario } from '../simulate/suite.js';
import { mixtureLogPdf, simulate, type GroundTruth } from '../simulate/generator.js';
import type { MixtureSpec } from '../simulate/families.js';

interface Figure {
  bench: string;
  value: number;
  unit: string;
  [extra: string]: unknown;
}

const ORACLE_THRESHOLD = Math.log(1e6);
const CHANGE_SCENARIOS = [
  'latency-new-slow-mode',
  'latency-mode-in-gap',
  'latency-mode-vanishes',
  'latency-weight-shift',
  'latency-location-shift',
  'latency-drift',
  'payload-size-shift',
];

function emit(f: Figure): void {
  process.stdout.write(JSON.stringify(f) + '\n');
}

class Collect extends Writable {
  readonly lines: string[] = [];
  private rest = '';
  override _write(chunk: Buffer | string, _enc: BufferEncoding, cb: () => void): void {
    const text = this.rest + chunk.toString();
    const parts = text.split('\n');
    this.rest = parts.pop() ?? '';
    for (const p of parts) if (p.length > 0) this.lines.push(p);
    cb();
  }
}

interface AlertLine {
  offset: number;
  stream: string;
  kind: string;
  state: string;
}

async function writeScenario(dir: string, name: string, events: number, seed: number): Promise<{ path: string; truth: GroundTruth; lines: { offset: number; stream: string; value: number }[] }> {
  const run = simulate(buildScenario(name, { events }), seed);
  const path = join(dir, `${name}-${seed}.ndjson`);
  const out = createWriteStream(path);
  const lines: { offset: number; stream: string; value: number }[] = [];
  let block = '';
  for (const r of run.records()) {
    block += r.line + '\n';
    if (r.bad === null) lines.push({ offset: r.offset, stream: r.stream, value: r.value });
    if (block.length > 1 << 20) {
      if (!out.write(block)) await once(out, 'drain');
      block = '';
    }
  }
  out.end(block);
  await once(out, 'finish');
  return { path, truth: run.truth(), lines };
}

/** Delay (events of the changed stream after the change) of the oracle CUSUM started at the change. */
function oracleDelay(values: { offset: number; stream: string; value: number }[], stream: string, from: number, pre: MixtureSpec, post: MixtureSpec): number | null {
  let s = 0;
  let n = 0;
  for (const v of values) {
    if (v.offset < from || v.stream !== stream) continue;
    n++;
    s = Math.max(0, s + mixtureLogPdf(post, v.value) - mixtureLogPdf(pre, v.value));
    if (s >= ORACLE_THRESHOLD) return n;
  }
  return null;
}

function eventsBetween(values: { offset: number; stream: string }[], stream: string, from: number, to: number): number {
  let n = 0;
  for (const v of values) if (v.stream === stream && v.offset >= from && v.offset <= to) n++;
  return n;
}

function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  return s.length === 0 ? NaN : s.length % 2 ? s[(s.length - 1) / 2] : 0.5 * (s[s.length / 2 - 1] + s[s.length / 2]);
}

async function replayFile(path: string): Promise<{ summary: ReplaySummary; alerts: AlertLine[] }> {
  const sink = new Collect();
  const summary = await runReplay({ files: [path] }, sink);
  return { summary, alerts: sink.lines.map((l) => JSON.parse(l) as AlertLine) };
}

async function main(): Promise<void> {
  const stationaryEvents = Number(process.env.BENCH_STATIONARY_EVENTS ?? 2_000_000);
  const seeds = Number(process.env.BENCH_SEEDS ?? 5);
  const dir = await mkdtemp(join(tmpdir(), 'modewatch-bench-'));
  const table: string[] = [];
  const ratios: number[] = [];
  let allDetected = true;
  try {
    for (const name of CHANGE_SCENARIOS) {
      const delays: number[] = [];
      const oracles: number[] = [];
      const kinds: string[] = [];
      let expected = '';
      let missed = 0;
      let falseBefore = 0;
      for (let seed = 1; seed <= seeds; seed++) {
        const { path, truth, lines } = await writeScenario(dir, name, 20_000, seed);
        const { alerts } = await replayFile(path);
        await rm(path);
        const change = truth.changes[0];
        expected = change.kind;
        falseBefore += alerts.filter((a) => a.state === 'firing' && a.offset < change.offset).length;
        const first = alerts.find((a) => a.state === 'firing' && a.stream === change.stream && a.offset >= change.offset);
        const oracle = oracleDelay(lines, change.stream, change.offset, change.pre, change.post);
        if (oracle !== null) oracles.push(oracle);
        if (first === undefined) {
          missed++;
          kinds.push('none');
          continue;
        }
        delays.push(eventsBetween(lines, change.stream, change.offset, first.offset));
        kinds.push(first.kind);
      }
      const right = kinds.filter((k) => k === expected).length;
      const d = median(delays);
      const o = median(oracles);
      const ratio = d / o;
      if (missed > 0 || right < seeds) allDetected = false;
      if (Number.isFinite(ratio)) ratios.push(ratio);
      emit({ bench: `detect/${name}/delay`, value: d, unit: 'events', oracleDelay: o, ratio: Number(ratio.toFixed(2)), expected, detectedKinds: kinds, missed, falseAlarmsBeforeChange: falseBefore, seeds });
      table.push(`${name.padEnd(24)} ${expected.padEnd(15)} ${String(right).padStart(2)}/${seeds} right  delay ${String(d).padStart(6)}  oracle ${String(o).padStart(6)}  ratio ${ratio.toFixed(2)}  false-before ${falseBefore}`);
    }
    emit({ bench: 'detect/median_delay_ratio', value: Number(median(ratios).toFixed(2)), unit: 'ratio', target: '<= 3', allDetectedWithRightKind: allDetected });

    for (const name of ['latency-stationary', 'latency-stationary-outliers']) {
      const { path, truth } = await writeScenario(dir, name, stationaryEvents, 1);
      const { summary, alerts } = await replayFile(path);
      await rm(path);
      const firing = alerts.filter((a) => a.state === 'firing').length;
      emit({ bench: `detect/${name}/false_alarms`, value: firing, unit: 'alerts', events: stationaryEvents, outliers: truth.outliers });
      emit({ bench: `replay/${name}/throughput`, value: Math.round(summary.recordsPerSecond), unit: 'records/s', records: summary.records });
      table.push(`${name.padEnd(24)} ${stationaryEvents} events: ${firing} alert(s); replay ${Math.round(summary.recordsPerSecond)} records/s`);
      if (name === 'latency-stationary') {
        // Current model against the true mixture (log-normal components: normal on the log scale).
        const s = Object.values(summary.finalComponents)[0];
        const trueM = truth.streams[0].final;
        const comps = [...s.current].sort((a, b) => a.location - b.location);
        const truthComps = trueM.components
          .map((c, i) => ({ w: trueM.weights[i], meanlog: (c as { meanlog: number }).meanlog, sdlog: (c as { sdlog: number }).sdlog }))
          .sort((a, b) => a.meanlog - b.meanlog);
        let wErr = 0;
        let mErr = 0;
        if (comps.length === truthComps.length) {
          comps.forEach((c, i) => {
            wErr = Math.max(wErr, Math.abs(c.weight - truthComps[i].w));
            mErr = Math.max(mErr, Math.abs(Math.log(c.location) - truthComps[i].meanlog) / truthComps[i].sdlog);
          });
        }
        emit({ bench: 'detect/stationary/current_weight_error', value: Number(wErr.toFixed(4)), unit: 'abs', target: '<= 0.01', components: comps.length });
        emit({ bench: 'detect/stationary/current_mean_error', value: Number(mErr.toFixed(4)), unit: 'sd', target: '<= 0.05' });
      }
    }
  } finally {
    await rm(dir, { recursive: true, force: true });
  }
  process.stderr.write('\n' + table.join('\n') + '\n');
}

main().catch((e: unknown) => {
  process.stderr.write(String(e instanceof Error ? e.stack : e) + '\n');
  process.exit(1);
});
