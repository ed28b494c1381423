/**
 * The Kafka consumer on a thread of its own (see kafka-thread-source.ts): a KafkaSource whose handlers forward
 * to the daemon's thread. Batches are posted and the next fetch goes on while the daemon models them, up to
 * MAX_RECORDS_IN_FLIGHT records ahead (kafkajs does not fetch while a batch is in hand, so a deeper queue keeps
 * it fetching through the daemon's slower moments, such as a stream's first fit); assignment and revocation wait for the daemon's answer, and come after every
 * batch posted before them, so checkpoints still cover exactly what was processed.
 */
import { parentPort, workerData } from 'node:worker_threads';
import type { KafkaLogger } from './kafka-client.js';
import { KafkaSource } from './kafka-source.js';
import { fromWire, packBatch, type FromWorker, type ToWorker, type WireOptions } from './kafka-thread-protocol.js';

/** About 8 MB of small JSON events; always at least one batch. */
const MAX_RECORDS_IN_FLIGHT = 100_000;

const port = parentPort;
if (port === null) throw new Error('kafka-thread-worker must run as a worker thread');
const post = (m: FromWorker, transfer: ArrayBuffer[] = []): void => port.postMessage(m, transfer);

const logger: KafkaLogger = {
  debug: (obj, msg) => post({ t: 'log', level: 'debug', obj, msg }),
  info: (obj, msg) => post({ t: 'log', level: 'info', obj, msg }),
  warn: (obj, msg) => post({ t: 'log', level: 'warn', obj, msg }),
  error: (obj, msg) => post({ t: 'log', level: 'error', obj, msg }),
};

const source = new KafkaSource(fromWire(workerData as WireOptions, logger));
let nextId = 0;
const waiting = new Map<number, (v: [string, number][] | null) => void>();
let inFlight = 0;
let recordsInFlight = 0;
const sizes: number[] = [];
let wake: (() => void) | null = null;

function ask(m: { t: 'assigned' | 'revoked'; partitions: string[] }): Promise<[string, number][] | null> {
  const id = ++nextId;
  post({ ...m, id });
  return new Promise((resolve) => waiting.set(id, resolve));
}

port.on('message', (m: ToWorker) => {
  if (m.t === 'reply') {
    waiting.get(m.id)?.(m.value);
    waiting.delete(m.id);
  } else if (m.t === 'ack') {
    inFlight--;
    recordsInFlight -= sizes.shift() ?? 0;
    const w = wake;
    wake = null;
    w?.();
  } else if (m.t === 'commit') {
    source.commit(new Map(m.positions)).then(
      () => post({ t: 'committed', id: m.id, error: null }),
      (e: unknown) => post({ t: 'committed', id: m.id, error: e instanceof Error ? e.message : String(e) }),
    );
  } else if (m.t === 'stop') {
    clearInterval(status);
    void source.stop().finally(() => post({ t: 'stopped' }));
  }
});

const status = setInterval(() => post({ t: 'status', lag: [...source.lag()], ready: source.ready() }), 500);

source
  .start({
    onBatch: async (batch) => {
      while (inFlight > 0 && recordsInFlight + batch.length > MAX_RECORDS_IN_FLIGHT) await new Promise<void>((resolve) => (wake = resolve));
      inFlight++;
      recordsInFlight += batch.length;
      sizes.push(batch.length);
      const { batch: packed, transfer } = packBatch(batch);
      post({ t: 'batch', batch: packed }, transfer);
    },
    onAssigned: async (partitions) => new Map((await ask({ t: 'assigned', partitions })) ?? []),
    onRevoked: async (partitions) => {
      await ask({ t: 'revoked', partitions });
    },
    onFatal: (e) => post({ t: 'fatal', message: e.message }),
  })
  .then(
    () => post({ t: 'started' }),
    (e: unknown) => post({ t: 'startFailed', message: e instanceof Error ? e.message : String(e) }),
  );
