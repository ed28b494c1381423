/**
 * A Kafka Source whose consumer runs on a worker thread (kafka-thread-worker.ts). kafkajs spends about as long
 * fetching and decoding a record as the daemon spends modelling it, so on a second core the two overlap instead
 * of adding up. The contract is KafkaSource's: batches of a partition arrive in order, onAssigned before a
 * partition's first batch, onRevoked after its last one, and offsets are committed only when the daemon says a
 * checkpoint covers them. Messages from the worker are handled one at a time, in order.
 */
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';
import { silentKafkaLogger, type KafkaLogger } from './kafka-client.js';
import type { KafkaSourceOptions } from './kafka-source.js';
import { KeyTable } from './key-table.js';
import { PackedRecordBatch, toWire, type FromWorker, type ToWorker } from './kafka-thread-protocol.js';
import type { Source, SourceHandlers } from './source.js';

/** The worker's compiled script: next to this file in dist/, or in dist/ when this file runs from src/ (tests). */
function workerScript(): string {
  const here = fileURLToPath(import.meta.url);
  const sibling = here.replace(/\.ts$/, '.js').replace(/kafka-thread-source\.js$/, 'kafka-thread-worker.js');
  if (!here.endsWith('.ts') && existsSync(sibling)) return sibling;
  const built = fileURLToPath(new URL('../../dist/ingest/kafka-thread-worker.js', import.meta.url));
  if (existsSync(built)) return built;
  throw new Error(`the Kafka consumer thread needs ${built}: run "npm run build" first`);
}

/** kafkajs makes a few objects per message; a larger young generation lets a fetched batch's garbage die young
 *  instead of being promoted (about 4 % less CPU per event in bench:kafka's side-by-side runs). */
const YOUNG_GENERATION_MB = 64;

/**
 * Bytes fetched per partition per request unless the options say otherwise (kafkajs's default is 1 MiB). A
 * smaller fetch leaves fewer of kafkajs's message objects alive when the consumer thread collects garbage, and
 * that collection shares the cores with the daemon's thread: in interleaved runs of bench:kafka, 256 KiB took
 * about 17 % less CPU per event and ran about 9 % faster than 1 MiB (128 KiB and 512 KiB did worse than 256).
 * A bare consumer is not helped by it (it ran slower with 256 KiB), so it is a setting of this design.
 */
const FETCH_BYTES_PER_PARTITION = 256 * 1024;

export class ThreadedKafkaSource implements Source {
  readonly name: string;
  private worker: Worker | null = null;
  private handlers: SourceHandlers | null = null;
  private queue: Promise<void> = Promise.resolve();
  private lagCache = new Map<string, number>();
  private isReady = false;
  private nextId = 0;
  private readonly commits = new Map<number, { resolve: () => void; reject: (e: Error) => void }>();
  private started: { resolve: () => void; reject: (e: Error) => void } | null = null;
  private stopped: (() => void) | null = null;
  private stopping = false;
  private readonly log: KafkaLogger;
  private readonly keys = new KeyTable();

  constructor(private readonly opts: KafkaSourceOptions) {
    this.log = opts.logger ?? silentKafkaLogger;
    this.name = `kafka:${opts.topics.map(String).join(',')}`;
  }

  start(handlers: SourceHandlers): Promise<void> {
    if (this.worker !== null) throw new Error('ThreadedKafkaSource.start called twice');
    this.handlers = handlers;
    const options = { ...this.opts, maxBytesPerPartition: this.opts.maxBytesPerPartition ?? FETCH_BYTES_PER_PARTITION };
    const worker = new Worker(workerScript(), { workerData: toWire(options), resourceLimits: { maxYoungGenerationSizeMb: YOUNG_GENERATION_MB } });
    this.worker = worker;
    worker.on('message', (m: FromWorker) => {
      // Batches, assignments and revocations one at a time, in the order the consumer produced them; everything
      // else at once (a commit's answer must not wait behind the revocation whose checkpoint asked for it).
      if (m.t === 'batch' || m.t === 'assigned' || m.t === 'revoked') {
        this.queue = this.queue.then(() => this.handle(m)).catch((e: unknown) => this.fail(e instanceof Error ? e : new Error(String(e))));
      } else void this.handle(m);
    });
    worker.on('error', (e) => this.fail(e));
    worker.on('exit', (code) => {
      if (!this.stopping) this.fail(new Error(`the Kafka consumer thread exited with code ${code}`));
      this.stopped?.();
    });
    return new Promise((resolve, reject) => (this.started = { resolve, reject }));
  }

  private post(m: ToWorker): void {
    this.worker?.postMessage(m);
  }

  private async handle(m: FromWorker): Promise<void> {
    const h = this.handlers as SourceHandlers;
    switch (m.t) {
      case 'batch':
        try {
          await h.onBatch(new PackedRecordBatch(m.batch, this.keys));
        } finally {
          this.post({ t: 'ack' });
        }
        return;
      case 'assigned': {
        const positions = await h.onAssigned(m.partitions);
        this.post({ t: 'reply', id: m.id, value: [...positions] });
        return;
      }
      case 'revoked':
        await h.onRevoked(m.partitions);
        this.post({ t: 'reply', id: m.id, value: null });
        return;
      case 'committed': {
        const c = this.commits.get(m.id);
        this.commits.delete(m.id);
        if (m.error === null) c?.resolve();
        else c?.reject(new Error(m.error));
        return;
      }
      case 'status':
        this.lagCache = new Map(m.lag);
        this.isReady = m.ready;
        return;
      case 'log':
        this.log[m.level](m.obj, m.msg);
        return;
      case 'started':
        this.isReady = true;
        this.started?.resolve();
        this.started = null;
        return;
      case 'startFailed':
        this.started?.reject(new Error(m.message));
        this.started = null;
        return;
      case 'fatal':
        this.isReady = false;
        h.onFatal(new Error(m.message));
        return;
      case 'stopped':
        return;
    }
  }

  private fail(e: Error): void {
    this.isReady = false;
    if (this.started !== null) {
      this.started.reject(e);
      this.started = null;
      return;
    }
    if (!this.stopping) this.handlers?.onFatal(e);
  }

  commit(positions: Map<string, number>): Promise<void> {
    if (this.worker === null) return Promise.resolve();
    const id = ++this.nextId;
    return new Promise((resolve, reject) => {
      this.commits.set(id, { resolve, reject });
      this.post({ t: 'commit', id, positions: [...positions] });
    });
  }

  /** The consumer stops fetching and hands its partitions back (the daemon checkpoints them); then the thread ends. */
  async stop(): Promise<void> {
    if (this.worker === null || this.stopping) return;
    this.stopping = true;
    const worker = this.worker;
    const done = new Promise<void>((resolve) => {
      const onMessage = (m: FromWorker) => {
        if (m.t === 'stopped') {
          worker.off('message', onMessage);
          resolve();
        }
      };
      worker.on('message', onMessage);
    });
    this.post({ t: 'stop' });
    await done;
    await this.queue; // everything the consumer sent before it stopped is handled
    this.isReady = false;
    await worker.terminate();
    this.worker = null;
  }

  lag(): Map<string, number> {
    return this.lagCache;
  }

  ready(): boolean {
    return this.isReady;
  }
}
