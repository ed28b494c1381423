/**
 * Kafka throughput and memory per stream (`npm run bench:kafka`; not a timed test).
 *
 * 1. Starts a broker (startBroker: MODEWATCH_KAFKA_BROKERS, Docker, or the Kafka jars), produces 1 million JSON
 *    events {"ts","value"} keyed by stream (10 invented latency streams) to a one-partition topic, then reads the
 *    topic from the start, in one run, with (a) a bare kafkajs consumer whose eachBatch does nothing, kafkajs as
 *    published, (b) the same with the daemon's record decoder in kafkajs (src/ingest/kafkajs.ts), both on threads
 *    of their own (bare-consumer-thread.ts), and (c) the daemon pipeline (startDaemon: KafkaSource, decoder,
 *    StreamRegistry, checkpoints to a directory at the default cadence, no alert sinks). Each has its own group;
 *    the clock starts once the group is joined and stops when all records were consumed (a, b) or accepted into
 *    the models (c). The target compares (c) with (a); the ratio of (c) to (b) says what the daemon costs beyond
 *    reading, and the ratio of (b) to (a) what the record decoder saves.
 * 2. Memory per 1-D stream: one monitor run to the armed state on simulated data, snapshotted, restored as N
 *    renamed copies into a StreamRegistry built as the daemon builds it (256 recent values per stream); growth / N
 *    of rss, heapUsed, and heapUsed + arrayBuffers (typed arrays live outside the JS heap) after a full GC,
 *    for N = 10 000 and 100 000. rss also keeps what the allocator has not returned to the system. And the serialized model state per stream:
 *    the JSON of the reference and current OnlineMixture1D states only.
 *
 * The consumers are measured in alternating rounds (BENCH_KAFKA_ROUNDS, default 5: a, b, c, a, b, c, ...),
 * each round with its own group, so that both see the same machine load. The ratio reported is the median of the
 * rounds' paired ratios (a shared machine's load changes from one round to the next, and a pair shares it); the
 * ratio of the median rates is printed beside it, and every round too.
 *
 * Prints JSON lines {"bench","value","unit"[,"target"]} like `npm run bench`. BENCH_KAFKA_EVENTS overrides the
 * event count (e.g. for a quick look); BENCH_KAFKA_TOPIC names a topic to reuse when it already holds that many
 * records (produced by an earlier run against the same broker, MODEWATCH_KAFKA_BROKERS), so that repeated runs
 * skip producing; BENCH_KAFKA_MEMORY=0 skips the memory part.
 */
import { mkdir, mkdtemp, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { Worker } from 'node:worker_threads';
import pino from 'pino';
import { loadOrExplain, startDaemon } from '../cli/run-command.js';
import { defaultResolver } from '../cli/replay.js';
import { startBroker } from '../devtools/kafka-broker.js';
import { Kafka, logLevel } from '../ingest/kafkajs.js';
import { EventSlot } from '../ingest/event.js';
import { Random } from '../math/random.js';
import { simulate } from '../simulate/generator.js';
import { buildScenario } from '../simulate/suite.js';
import type { MonitorState } from '../detect/stream-monitor.js';
import { StreamRegistry, type RegistrySnapshot } from '../streams/stream-registry.js';
import type { BareConsumerJob, BareConsumerResult } from './bare-consumer-thread.js';
import { gcFunction } from './gc.js';
import { inventedLatencyMessage } from './invented-latency.js';

interface Figure {
  bench: string;
  value: number;
  unit: string;
  target?: string;
  [extra: string]: unknown;
}

function emit(f: Figure): void {
  console.log(JSON.stringify(f));
}

function note(msg: string): void {
  console.error(`[bench:kafka] ${msg}`);
}

/** Produces n invented latency events (invented-latency.ts) to a new one-partition topic; false when the topic already holds them. */
async function produceEvents(brokers: string[], topic: string, n: number): Promise<boolean> {
  const kafka = new Kafka({ clientId: 'modewatch-bench', brokers, logLevel: logLevel.NOTHING });
  const admin = kafka.admin();
  await admin.connect();
  try {
    if ((await admin.listTopics()).includes(topic)) {
      const ends = await admin.fetchTopicOffsets(topic);
      const held = ends.reduce((a, o) => a + Number(o.high) - Number(o.low), 0);
      if (ends.length === 1 && held >= n) return false;
      throw new Error(`topic ${topic} exists with ${ends.length} partition(s) and ${held} records; the bench needs one partition with at least ${n}`);
    }
    await admin.createTopics({ topics: [{ topic, numPartitions: 1, replicationFactor: 1 }], waitForLeaders: true });
  } finally {
    await admin.disconnect();
  }
  const producer = kafka.producer({ allowAutoTopicCreation: false });
  await producer.connect();
  const rng = new Random(42);
  // kafkajs groups a send's messages by partition in time quadratic in their number: many small sends.
  const chunk = 1_000;
  const inflight: Promise<unknown>[] = [];
  for (let i = 0; i < n; i += chunk) {
    const messages = [];
    for (let j = i; j < Math.min(n, i + chunk); j++) messages.push(inventedLatencyMessage(j, rng));
    // A few requests in flight: produce is not what is measured, but it should not take all day.
    inflight.push(producer.send({ topic, acks: 1, messages }));
    if (inflight.length >= 16) await inflight.shift();
  }
  await Promise.all(inflight);
  await producer.disconnect();
  return true;
}

/** One bare consumer run on its own thread (bare-consumer-thread.ts), with kafkajs's record decoder or ours. */
function bareConsumer(brokers: string[], topic: string, n: number, decoder: BareConsumerJob['decoder']): Promise<BareConsumerResult> {
  const job: BareConsumerJob = { brokers, topic, n, decoder };
  const worker = new Worker(new URL('./bare-consumer-thread.js', import.meta.url), { workerData: job });
  return new Promise((resolve, reject) => {
    let result: BareConsumerResult | null = null;
    worker.once('message', (m: BareConsumerResult) => (result = m));
    worker.once('error', reject);
    worker.once('exit', (code) => {
      if (result === null) reject(new Error(`the bare consumer thread exited with code ${code} and no result`));
      else if (result.decoder !== decoder) reject(new Error(`the bare consumer asked for ${decoder}'s record decoder ran with ${result.decoder}'s`));
      else resolve(result);
    });
  });
}

async function daemonPipeline(brokers: string[], topic: string, n: number, dir: string): Promise<{ rate: number; checkpoints: string; busy: number; cpuPerEvent: number }> {
  await mkdir(dir, { recursive: true });
  const configPath = join(dir, 'bench.yaml');
  await writeFile(
    configPath,
    [
      'kafka:',
      `  brokers: [${brokers.join(', ')}]`,
      `  groupId: bench-daemon-${Date.now()}`,
      '  fromBeginning: true',
      '  topics:',
      `    - name: ${topic}`,
      '      decoding:',
      '        value: { format: json, path: value }',
      '        key: { from: message_key }',
      '        time: { from: field, path: ts, unit: ms }',
      'streams:',
      '  defaults: { scale: log, unit: milliseconds }',
      'checkpoint:',
      `  directory: ${join(dir, 'state')}`,
      'alerts:',
      '  sinks: []',
      'http:',
      '  listen: 127.0.0.1:0',
      '',
    ].join('\n'),
  );
  const config = loadOrExplain(configPath, {});
  const running = await startDaemon(config, pino({ level: 'error' }, pino.destination(2)), (e) => note(`daemon failed: ${e.message}`));
  // startDaemon resolves once the group is joined and the partition assigned.
  const t0 = performance.now();
  const c0 = process.cpuUsage();
  const registry = running.registry;
  while (registry.accepted + [...registry.rejections.values()].reduce((a, b) => a + b, 0) < n) await new Promise((r) => setTimeout(r, 2));
  const t1 = performance.now();
  const cpu = process.cpuUsage(c0);
  const busy = running.health.busySeconds / ((t1 - t0) / 1000);
  const every = `${config.checkpoint.everyEvents} events or ${config.checkpoint.everySeconds} s`;
  await running.stop();
  return { rate: n / ((t1 - t0) / 1000), checkpoints: every, busy, cpuPerEvent: (cpu.user + cpu.system) / n };
}

// -------------------------------------------------------------------------------------------------- memory

type NumberSnapshot = RegistrySnapshot & { monitor: { kind: 'number'; state: MonitorState } };

/** One stream's snapshot, run to the armed state on invented data with default settings on the log scale. */
function armedSnapshot(): NumberSnapshot {
  const resolve = defaultResolver('log');
  const registry = new StreamRegistry({ maxStreams: 1, resolve, onAlert: () => {} });
  const slot = new EventSlot();
  for (const r of simulate(buildScenario('latency-stationary', { events: 20_000 }), 3).records()) {
    if (r.bad !== null) continue;
    slot.stream = 'proto';
    slot.ts = r.ts;
    slot.value = r.value;
    slot.offset = r.offset;
    slot.partition = 'p-0';
    registry.observe(slot);
  }
  const snap = registry.snapshot()[0];
  if (snap.monitor.kind !== 'number' || snap.monitor.state.phase !== 'armed') throw new Error('the prototype monitor is not an armed number monitor after 20 000 events');
  return { ...snap, monitor: snap.monitor };
}

/** Growth per stream of rss, of the JS heap, and of the heap plus typed-array buffers (which live outside the heap). */
function memoryPerStream(gc: () => void, proto: NumberSnapshot, n: number): { rss: number; heap: number; heapAndBuffers: number } {
  const resolve = defaultResolver('log');
  gc();
  gc();
  const m0 = process.memoryUsage();
  const registry = new StreamRegistry({ maxStreams: n, resolve, onAlert: () => {} });
  const block = 10_000;
  for (let i = 0; i < n; i += block) {
    const copies: RegistrySnapshot[] = [];
    for (let j = i; j < Math.min(n, i + block); j++) {
      const name = `svc-${j}`;
      copies.push({ ...proto, stream: name, monitor: { kind: 'number', state: { ...proto.monitor.state, stream: name } } });
    }
    registry.restore(copies);
  }
  gc();
  gc();
  const m1 = process.memoryUsage();
  if (registry.size !== n) throw new Error(`registry holds ${registry.size} streams, expected ${n}`);
  return {
    rss: (m1.rss - m0.rss) / n,
    heap: (m1.heapUsed - m0.heapUsed) / n,
    heapAndBuffers: (m1.heapUsed + m1.arrayBuffers - m0.heapUsed - m0.arrayBuffers) / n,
  };
}

// -------------------------------------------------------------------------------------------------- main

async function main(): Promise<void> {
  const n = positiveInteger('BENCH_KAFKA_EVENTS', 1_000_000);
  const rounds = positiveInteger('BENCH_KAFKA_ROUNDS', 5);
  const gc = gcFunction();
  if (process.env.BENCH_KAFKA_MEMORY !== '0') memoryFigures(gc);

  const dir = await mkdtemp(join(tmpdir(), 'modewatch-kafka-bench-'));
  const broker = await startBroker({ log: note });
  try {
    note(`broker: ${broker.how}`);
    const topic = process.env.BENCH_KAFKA_TOPIC || `bench-events-${Date.now()}`;
    const tp = performance.now();
    if (await produceEvents(broker.brokers, topic, n)) note(`produced ${n} events to ${topic} in ${((performance.now() - tp) / 1000).toFixed(1)} s`);
    else note(`reusing the ${n} events of ${topic}`);
    const bare: number[] = [];
    const bareOurs: number[] = [];
    const daemon: number[] = [];
    const ratios: number[] = [];
    const sameDecoderRatios: number[] = [];
    let checkpoints = '';
    for (let r = 1; r <= rounds; r++) {
      const b = await bareConsumer(broker.brokers, topic, n, 'kafkajs');
      bare.push(b.rate);
      emit({ bench: 'kafka/bare_consumer_round', value: Math.round(b.rate), unit: 'events/s', round: r, record_decoder: b.decoder, process_cpu_us_per_event: round3(b.cpuPerEvent) });
      const bo = await bareConsumer(broker.brokers, topic, n, 'modewatch');
      bareOurs.push(bo.rate);
      emit({ bench: 'kafka/bare_consumer_our_decoder_round', value: Math.round(bo.rate), unit: 'events/s', round: r, record_decoder: bo.decoder, process_cpu_us_per_event: round3(bo.cpuPerEvent) });
      const d = await daemonPipeline(broker.brokers, topic, n, join(dir, `round-${r}`));
      daemon.push(d.rate);
      ratios.push(d.rate / b.rate);
      sameDecoderRatios.push(d.rate / bo.rate);
      checkpoints = d.checkpoints;
      emit({ bench: 'kafka/daemon_round', value: Math.round(d.rate), unit: 'events/s', round: r, ratio: round3(d.rate / b.rate), ratio_same_decoder: round3(d.rate / bo.rate), modelling_busy_fraction: round3(d.busy), process_cpu_us_per_event: round3(d.cpuPerEvent) });
    }
    const mb = median(bare);
    const mbo = median(bareOurs);
    const md = median(daemon);
    const spread = (xs: number[]) => ({ min: round3(Math.min(...xs)), max: round3(Math.max(...xs)) });
    emit({ bench: 'kafka/bare_consumer', value: Math.round(mb), unit: 'events/s', events: n, rounds, statistic: 'median', record_decoder: 'kafkajs' });
    emit({ bench: 'kafka/bare_consumer_our_decoder', value: Math.round(mbo), unit: 'events/s', events: n, rounds, statistic: 'median', record_decoder: 'modewatch' });
    emit({ bench: 'kafka/daemon', value: Math.round(md), unit: 'events/s', events: n, rounds, statistic: 'median', checkpoints });
    emit({ bench: 'kafka/daemon_to_bare_ratio', value: round3(median(ratios)), unit: 'ratio', target: '>= 0.8', statistic: "median of the rounds' paired ratios", against: 'bare kafkajs consumer as published', ...spread(ratios) });
    emit({ bench: 'kafka/daemon_to_bare_ratio_of_medians', value: round3(md / mb), unit: 'ratio' });
    emit({ bench: 'kafka/daemon_to_bare_same_decoder_ratio', value: round3(median(sameDecoderRatios)), unit: 'ratio', statistic: "median of the rounds' paired ratios", against: "bare kafkajs consumer with the daemon's record decoder", ...spread(sameDecoderRatios) });
    emit({ bench: 'kafka/record_decoder_speedup_ratio', value: round3(median(bareOurs.map((x, i) => x / bare[i]))), unit: 'ratio', statistic: "median of the rounds' paired ratios", what: 'bare consumer rate with our record decoder over kafkajs\'s own' });
  } finally {
    await broker.stop();
    await rm(dir, { recursive: true, force: true });
  }
}

function positiveInteger(name: string, fallback: number): number {
  const raw = process.env[name];
  const v = raw === undefined || raw === '' ? fallback : Number(raw);
  if (!Number.isInteger(v) || v < 1) throw new Error(`${name} must be a positive integer, got ${raw}`);
  return v;
}

function round3(x: number): number {
  return Math.round(x * 1000) / 1000;
}

function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  const m = s.length >> 1;
  return s.length % 2 === 1 ? s[m] : (s[m - 1] + s[m]) / 2;
}

function memoryFigures(gc: () => void): void {

  // Memory first, while the heap is small and no broker client is loaded.
  const proto = armedSnapshot();
  const st = proto.monitor.state;
  const modelBytes = JSON.stringify(st.ref).length + JSON.stringify(st.cur).length;
  emit({ bench: 'memory/model_state_json_per_stream', value: modelBytes, unit: 'bytes', target: '<= 2048', components: st.cur?.ids.length });
  emit({ bench: 'memory/monitor_state_json_per_stream', value: JSON.stringify(st).length, unit: 'bytes' });
  for (const count of [10_000, 100_000]) {
    const m = memoryPerStream(gc, proto, count);
    emit({ bench: `memory/rss_per_stream_${count}`, value: Math.round(m.rss), unit: 'bytes' });
    emit({ bench: `memory/heap_per_stream_${count}`, value: Math.round(m.heap), unit: 'bytes' });
    emit({ bench: `memory/heap_and_buffers_per_stream_${count}`, value: Math.round(m.heapAndBuffers), unit: 'bytes' });
  }
  gc();
}

if (process.argv[1] !== undefined && import.meta.url === pathToFileURL(process.argv[1]).href) {
  main().then(
    () => process.exit(0),
    (e: unknown) => {
      console.error(e instanceof Error ? e.message : String(e));
      process.exit(1);
    },
  );
}
