/**
 * Helpers for the daemon's slow tests on a real broker: topics and producing, a configuration file for
 * `modewatch run`, the daemon as a child process, /metrics scraping, bounded waits, simulated records,
 * the checkpoint directory read back, and exact comparison of monitor states.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { createWriteStream, existsSync, type WriteStream } from 'node:fs';
import { writeFile } from 'node:fs/promises';
import { join, resolve } from 'node:path';
import type { IHeaders, KafkaMessage } from 'kafkajs';
import { Kafka, logLevel } from '../../src/ingest/kafkajs.js';
import type { MonitorState } from '../../src/detect/stream-monitor.js';
import type { Scenario } from '../../src/simulate/scenario.js';
import { simulate } from '../../src/simulate/generator.js';
import { DirCheckpointStore } from '../../src/state/dir-store.js';
import type { RegistrySnapshot } from '../../src/streams/stream-registry.js';

export const REPO = resolve(import.meta.dirname, '..', '..');
export const CLI = join(REPO, 'dist', 'cli', 'main.js');

export function sleep(ms: number): Promise<void> {
  return new Promise((res) => setTimeout(res, ms));
}

/** Polls `probe` until it returns something other than undefined/false, or throws after `timeoutMs` naming `what`. */
export async function waitFor<T>(what: string, probe: () => Promise<T | undefined | false> | T | undefined | false, timeoutMs: number, everyMs = 100): Promise<T> {
  const deadline = Date.now() + timeoutMs;
  let last: unknown;
  for (;;) {
    try {
      const v = await probe();
      if (v !== undefined && v !== false) return v;
    } catch (e) {
      last = e;
    }
    if (Date.now() > deadline) throw new Error(`timed out after ${timeoutMs} ms waiting for ${what}${last ? ` (last error: ${(last as Error).message})` : ''}`);
    await sleep(everyMs);
  }
}

export function kafkaClient(brokers: string[], clientId = 'modewatch-test'): Kafka {
  return new Kafka({ clientId, brokers, logLevel: logLevel.NOTHING });
}

export async function createTopic(brokers: string[], topic: string, partitions = 1): Promise<void> {
  const admin = kafkaClient(brokers).admin();
  await admin.connect();
  try {
    await admin.createTopics({ topics: [{ topic, numPartitions: partitions, replicationFactor: 1 }], waitForLeaders: true });
  } finally {
    await admin.disconnect();
  }
}

export interface OutRecord {
  key: string | null;
  value: Buffer | string | null;
  partition?: number;
  headers?: IHeaders;
}

/** Produces in order (per partition), acks=all, in chunks; returns the count sent per partition. */
export async function produce(brokers: string[], topic: string, records: readonly OutRecord[], chunk = 2000): Promise<Map<number, number>> {
  const producer = kafkaClient(brokers).producer({ allowAutoTopicCreation: false });
  await producer.connect();
  const perPartition = new Map<number, number>();
  try {
    for (let i = 0; i < records.length; i += chunk) {
      const part = records.slice(i, i + chunk);
      await producer.send({
        topic,
        acks: -1,
        messages: part.map((r) => ({ key: r.key, value: r.value, partition: r.partition ?? 0, headers: r.headers })),
      });
      for (const r of part) perPartition.set(r.partition ?? 0, (perPartition.get(r.partition ?? 0) ?? 0) + 1);
    }
  } finally {
    await producer.disconnect();
  }
  return perPartition;
}

/** Reads a topic from the start until `count` messages were seen or timeoutMs passed; returns what it saw. */
export async function consumeAll(brokers: string[], topic: string, count: number, timeoutMs: number): Promise<KafkaMessage[]> {
  // The topic may be created by the daemon a moment from now (kafkajs refuses to subscribe before it exists).
  const admin = kafkaClient(brokers).admin();
  await admin.connect();
  try {
    await waitFor(`topic ${topic} to exist`, async () => (await admin.fetchTopicMetadata({ topics: [topic] })).topics[0]?.partitions.length > 0, timeoutMs, 200);
  } finally {
    await admin.disconnect();
  }
  const consumer = kafkaClient(brokers).consumer({ groupId: `reader-${topic}-${process.pid}-${Date.now()}`, maxWaitTimeInMs: 200 });
  const got: KafkaMessage[] = [];
  await consumer.connect();
  try {
    await consumer.subscribe({ topics: [topic], fromBeginning: true });
    await consumer.run({
      eachMessage: async ({ message }) => {
        got.push(message);
      },
    });
    const deadline = Date.now() + timeoutMs;
    while (got.length < count && Date.now() < deadline) await sleep(100);
    // A little longer: anything beyond `count` would be a duplicate worth seeing.
    await sleep(500);
  } finally {
    await consumer.disconnect();
  }
  return got;
}

export interface DaemonConfigOptions {
  brokers: string[];
  topic: string;
  groupId: string;
  httpPort: number;
  checkpointDir: string;
  everyEvents?: number;
  everySeconds?: number;
  deadLetterTopic?: string;
  alertTopic?: string;
  maxBytes?: number;
  logLevel?: string;
  /** Consumer group session timeout; short so that a restart after SIGKILL is not kept waiting by the dead member. */
  sessionTimeoutMs?: number;
}

/** A `modewatch run` configuration for JSON records {"ts","value"} keyed by stream (streams `<topic>:<key>`). */
export function daemonConfigYaml(o: DaemonConfigOptions): string {
  const sinks = o.alertTopic !== undefined ? `[{ type: kafka, topic: ${o.alertTopic} }]` : '[]';
  return [
    '# Test configuration (invented streams).',
    'kafka:',
    `  brokers: [${o.brokers.join(', ')}]`,
    `  clientId: modewatch-test`,
    `  groupId: ${o.groupId}`,
    '  fromBeginning: true',
    `  sessionTimeoutMs: ${o.sessionTimeoutMs ?? 10_000}`,
    '  topics:',
    `    - name: ${o.topic}`,
    '      decoding:',
    '        value: { format: json, path: value }',
    '        key: { from: message_key }',
    '        time: { from: field, path: ts, unit: ms }',
    ...(o.maxBytes !== undefined ? [`        maxBytes: ${o.maxBytes}`] : []),
    ...(o.deadLetterTopic !== undefined ? [`  deadLetterTopic: ${o.deadLetterTopic}`] : []),
    'streams:',
    '  defaults: { scale: log, unit: milliseconds }',
    'checkpoint:',
    '  store: directory',
    `  directory: ${o.checkpointDir}`,
    `  everyEvents: ${o.everyEvents ?? 5000}`,
    `  everySeconds: ${o.everySeconds ?? 30}`,
    'alerts:',
    `  sinks: ${sinks}`,
    'http:',
    `  listen: 127.0.0.1:${o.httpPort}`,
    'logging:',
    `  level: ${o.logLevel ?? 'info'}`,
    '',
  ].join('\n');
}

export async function writeDaemonConfig(dir: string, o: DaemonConfigOptions, name = 'modewatch.yaml'): Promise<string> {
  const path = join(dir, name);
  await writeFile(path, daemonConfigYaml(o));
  return path;
}

/** `node dist/cli/main.js run --config FILE` as a child process, its output appended to a log file. */
export class DaemonProcess {
  readonly exited: Promise<{ code: number | null; signal: NodeJS.Signals | null }>;
  private output = '';
  private constructor(
    readonly child: ChildProcess,
    private readonly log: WriteStream,
  ) {
    this.exited = new Promise((res) => child.once('exit', (code, signal) => res({ code, signal })));
    const onData = (c: Buffer) => {
      log.write(c);
      this.output = (this.output + c.toString('utf8')).slice(-200_000);
    };
    child.stdout?.on('data', onData);
    child.stderr?.on('data', onData);
  }

  static spawn(configPath: string, logFile: string): DaemonProcess {
    if (!existsSync(CLI)) throw new Error(`${CLI} is missing: run "npm run build" first (the daemon runs from dist/)`);
    const log = createWriteStream(logFile, { flags: 'a' });
    const env = { ...process.env };
    delete env.MODEWATCH_KAFKA_BROKERS; // the config file names the broker of this test
    const child = spawn(process.execPath, [CLI, 'run', '--config', configPath], { cwd: REPO, env, stdio: ['ignore', 'pipe', 'pipe'] });
    return new DaemonProcess(child, log);
  }

  get alive(): boolean {
    return this.child.exitCode === null && this.child.signalCode === null;
  }

  /** The last 200 kB of its output (pino JSON lines). */
  get tail(): string {
    return this.output;
  }

  /** Sends the signal and waits for the exit (bounded); SIGKILL if it does not come. */
  async signal(sig: NodeJS.Signals, timeoutMs = 40_000): Promise<{ code: number | null; signal: NodeJS.Signals | null }> {
    if (this.alive) this.child.kill(sig);
    const r = await Promise.race([this.exited, sleep(timeoutMs).then(() => null)]);
    if (r === null) {
      this.child.kill('SIGKILL');
      await this.exited;
      throw new Error(`daemon did not exit within ${timeoutMs} ms of ${sig}; last output:\n${this.output.slice(-3000)}`);
    }
    await new Promise<void>((res) => this.log.end(() => res()));
    return r;
  }

  /** For afterAll: kill without waiting for grace, never throws. */
  async dispose(): Promise<void> {
    if (this.alive) this.child.kill('SIGKILL');
    await Promise.race([this.exited, sleep(5000)]);
    if (!this.log.closed) await new Promise<void>((res) => this.log.end(() => res()));
  }
}

/** GET a URL with a short timeout; null on any network error (a daemon starting up or gone). */
export async function httpGet(url: string, timeoutMs = 3000): Promise<{ status: number; text: string } | null> {
  try {
    const r = await fetch(url, { signal: AbortSignal.timeout(timeoutMs) });
    return { status: r.status, text: await r.text() };
  } catch {
    return null;
  }
}

/** One sample of a family from Prometheus text exposition; labels must match exactly those given (subset match). */
export function metricValue(text: string, name: string, labels: Record<string, string> = {}): number | undefined {
  for (const line of text.split('\n')) {
    if (!line.startsWith(name)) continue;
    const m = /^([a-zA-Z_:][a-zA-Z0-9_:]*)(\{([^}]*)\})?\s+(\S+)/.exec(line);
    if (!m || m[1] !== name) continue;
    const have: Record<string, string> = {};
    for (const kv of (m[3] ?? '').matchAll(/([a-zA-Z_][a-zA-Z0-9_]*)="((?:[^"\\]|\\.)*)"/g)) have[kv[1]] = kv[2];
    if (Object.entries(labels).every(([k, v]) => have[k] === v)) return Number(m[4]);
  }
  return undefined;
}

/** modewatch_events_total from a running daemon's /metrics, or undefined while it does not answer. */
export async function eventsTotal(baseUrl: string): Promise<number | undefined> {
  const r = await httpGet(`${baseUrl}/metrics`);
  return r === null || r.status !== 200 ? undefined : metricValue(r.text, 'modewatch_events_total');
}

export interface SavedCheckpoint {
  positions: Record<string, number>;
  counters: Record<string, Record<string, number>>;
  /** Monitor state by stream name (number streams only: these tests send numbers). */
  monitors: Map<string, MonitorState>;
}

export async function loadCheckpointDir(dir: string): Promise<SavedCheckpoint> {
  const store = new DirCheckpointStore(dir);
  const cp = await store.load();
  await store.close();
  const monitors = new Map<string, MonitorState>();
  for (const s of cp.streams) {
    const saved = (JSON.parse(s.state) as RegistrySnapshot).monitor;
    if (saved.kind === 'number') monitors.set(s.stream, saved.state);
  }
  return { positions: cp.positions, counters: cp.counters, monitors };
}

export interface SimEvent {
  /** Stream name inside the scenario; the Kafka key. */
  key: string;
  ts: number;
  value: number;
}

/** Good records only (bad lines of a scenario are dropped), in output order. */
export function simulatedEvents(scenario: Scenario, seed: number): SimEvent[] {
  const out: SimEvent[] = [];
  for (const r of simulate(scenario, seed).records()) if (r.bad === null) out.push({ key: r.stream, ts: r.ts, value: r.value });
  return out;
}

/** The Kafka value the test configuration decodes: {"ts": ms, "value": x}. */
export function eventValue(e: SimEvent): string {
  return JSON.stringify({ ts: e.ts, value: e.value });
}

/**
 * Largest relative difference |a-b| / max(|a|,|b|) over every number in two JSON-like values (0 for equal
 * values); throws, naming the path, if their shapes or non-numeric leaves differ.
 */
export function maxRelativeDifference(a: unknown, b: unknown, path = '$'): number {
  if (typeof a === 'number' && typeof b === 'number') {
    if (Object.is(a, b) || a === b) return 0;
    if (Number.isNaN(a) || Number.isNaN(b)) throw new Error(`${path}: ${a} vs ${b}`);
    return Math.abs(a - b) / Math.max(Math.abs(a), Math.abs(b));
  }
  if (Array.isArray(a) && Array.isArray(b)) {
    if (a.length !== b.length) throw new Error(`${path}: arrays of length ${a.length} vs ${b.length}`);
    let m = 0;
    for (let i = 0; i < a.length; i++) m = Math.max(m, maxRelativeDifference(a[i], b[i], `${path}[${i}]`));
    return m;
  }
  if (typeof a === 'object' && a !== null && typeof b === 'object' && b !== null && !Array.isArray(a) && !Array.isArray(b)) {
    const ka = Object.keys(a).sort();
    const kb = Object.keys(b).sort();
    if (ka.join(',') !== kb.join(',')) throw new Error(`${path}: keys ${ka.join(',')} vs ${kb.join(',')}`);
    let m = 0;
    for (const k of ka) m = Math.max(m, maxRelativeDifference((a as Record<string, unknown>)[k], (b as Record<string, unknown>)[k], `${path}.${k}`));
    return m;
  }
  if (a !== b) throw new Error(`${path}: ${JSON.stringify(a)} vs ${JSON.stringify(b)}`);
  return 0;
}
