/**
 * bench:kafka's bare consumer, on a thread of its own so that it loads kafkajs as asked: as published
 * (`decoder: 'kafkajs'`) or with modewatch's record decoder in place (`'modewatch'`, src/ingest/kafkajs.ts).
 * Each thread has its own module cache, so the two never mix. Its eachBatch does nothing; the clock starts when
 * the group is joined and stops when n records were handed over. Posts { rate, cpuPerEvent, decoder }.
 */
import { parentPort, workerData } from 'node:worker_threads';

export interface BareConsumerJob {
  brokers: string[];
  topic: string;
  n: number;
  decoder: 'kafkajs' | 'modewatch';
}

export interface BareConsumerResult {
  rate: number;
  /** Process CPU per record (the daemon's threads are idle meanwhile). */
  cpuPerEvent: number;
  /** Whose record decoder kafkajs used. */
  decoder: 'kafkajs' | 'modewatch';
}

const job = workerData as BareConsumerJob;
const lib = job.decoder === 'modewatch' ? await import('../ingest/kafkajs.js') : { ...(await import('kafkajs')), recordDecoderOwner: 'kafkajs' as const };
const kafka = new lib.Kafka({ clientId: `modewatch-bench-bare-${job.decoder}`, brokers: job.brokers, logLevel: lib.logLevel.NOTHING });
const consumer = kafka.consumer({ groupId: `bench-bare-${job.decoder}-${Date.now()}`, maxWaitTimeInMs: 1000 });
let seen = 0;
let t0 = 0;
let t1 = 0;
let done!: () => void;
const finished = new Promise<void>((res) => (done = res));
let c0: NodeJS.CpuUsage | undefined;
let c1: NodeJS.CpuUsage | undefined;
consumer.on(consumer.events.GROUP_JOIN, () => {
  if (t0 === 0) {
    t0 = performance.now();
    c0 = process.cpuUsage();
  }
});
await consumer.connect();
await consumer.subscribe({ topics: [job.topic], fromBeginning: true });
await consumer.run({
  eachBatch: async ({ batch }) => {
    seen += batch.messages.length;
    if (seen >= job.n && t1 === 0) {
      t1 = performance.now();
      c1 = process.cpuUsage(c0);
      done();
    }
  },
});
await finished;
await consumer.disconnect();
const cpu = c1 as NodeJS.CpuUsage;
const result: BareConsumerResult = { rate: job.n / ((t1 - t0) / 1000), cpuPerEvent: (cpu.user + cpu.system) / job.n, decoder: lib.recordDecoderOwner };
parentPort?.postMessage(result);
