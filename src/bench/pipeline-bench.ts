/**
 * The daemon thread's per-event path without Kafka (`npm run bench pipeline`): packed batches as the consumer
 * thread posts them (kafka-thread-protocol.ts), read through their cursor, decoded (flat JSON from bytes),
 * routed by the stream registry into the 1-D monitors, exactly as Daemon.onBatch does. 10 invented streams
 * (invented-latency.ts). After a warm-up that arms every monitor, over 1M more events: the time per event, the
 * garbage collections while they run and what the heap kept after a full collection (both ~0 when the per-event
 * path allocates nothing; housekeeping every 256 events allocates a little), and the time reading and decoding
 * alone take.
 */
import { defaultResolver } from '../cli/replay.js';
import { EventSlot } from '../ingest/event.js';
import { packBatch, PackedRecordBatch, type PackedBatch } from '../ingest/kafka-thread-protocol.js';
import { KeyTable } from '../ingest/key-table.js';
import { makeMessageDecoder } from '../ingest/message-decoder.js';
import { recordBatch, type RawRecord } from '../ingest/source.js';
import { Random } from '../math/random.js';
import { StreamRegistry } from '../streams/stream-registry.js';
import { collectionsDuring, gcFunction } from './gc.js';
import { inventedLatencyMessage } from './invented-latency.js';
import type { BenchFigure } from './mv-bench.js';

const WARMUP = 300_000;
const MEASURED = 1_000_000;
/** About what one 256 KiB fetch holds of these messages. */
const BATCH = 3700;

function packedBatches(n: number): PackedBatch[] {
  const rng = new Random(42);
  const out: PackedBatch[] = [];
  for (let i = 0; i < n; i += BATCH) {
    const records: RawRecord[] = [];
    for (let j = i; j < Math.min(n, i + BATCH); j++) {
      const m = inventedLatencyMessage(j, rng);
      records.push({ partition: 'bench-0', offset: j, key: Buffer.from(m.key), value: Buffer.from(m.value), timestamp: 0, headers: {}, topic: 'bench' });
    }
    out.push(packBatch(recordBatch('bench-0', records)).batch);
  }
  return out;
}

type Stage = 'read' | 'decode' | 'all';

/** One pass over the batches, up to `stage`; returns a value read from the work so that it cannot be dropped. */
function pass(batches: readonly PackedBatch[], stage: Stage, keys: KeyTable, registry: StreamRegistry, slot: EventSlot): number {
  const decode = makeMessageDecoder({ topic: 'bench', value: { format: 'json', path: 'value' }, key: { from: 'message_key' }, time: { from: 'field', path: 'ts', unit: 'ms' } });
  let acc = 0;
  for (const p of batches) {
    const b = new PackedRecordBatch(p, keys);
    for (let i = 0; i < b.length; i++) {
      const r = b.record(i);
      if (stage === 'read') {
        acc += r.offset;
        continue;
      }
      slot.partition = b.partition;
      slot.offset = r.offset;
      if (decode(r, slot) !== null) continue;
      if (stage === 'decode') acc += slot.value;
      else registry.observe(slot);
    }
  }
  return acc + registry.accepted;
}

export async function benchPipeline(): Promise<BenchFigure[]> {
  const warm = packedBatches(WARMUP + MEASURED);
  const split = Math.ceil(WARMUP / BATCH);
  const head = warm.slice(0, split);
  const tail = warm.slice(split);
  const figures: BenchFigure[] = [];
  const nsPer = (t: number, n: number) => Math.round((t * 1e6) / n);

  const newRegistry = () => new StreamRegistry({ maxStreams: 1000, resolve: defaultResolver('log'), onAlert: () => {} });
  for (const stage of ['read', 'decode'] as const) {
    const keys = new KeyTable();
    pass(head, stage, keys, newRegistry(), new EventSlot());
    const t0 = performance.now();
    pass(tail, stage, keys, newRegistry(), new EventSlot());
    figures.push({ bench: `daemon_thread_${stage}_ns_per_event`, value: nsPer(performance.now() - t0, MEASURED), unit: 'ns' });
  }

  const keys = new KeyTable();
  const registry = newRegistry();
  const slot = new EventSlot();
  pass(head, 'all', keys, registry, slot); // every monitor bootstraps and arms
  const gc = gcFunction();
  gc();
  await new Promise((r) => setTimeout(r, 50));
  const before = process.memoryUsage().heapUsed;
  const t0 = performance.now();
  const { result: t, collections: gcs } = await collectionsDuring(() => {
    pass(tail, 'all', keys, registry, slot);
    return performance.now() - t0;
  });
  gc();
  const after = process.memoryUsage().heapUsed;
  figures.push({ bench: 'daemon_thread_all_ns_per_event', value: nsPer(t, MEASURED), unit: 'ns' });
  figures.push({ bench: 'daemon_thread_1m_gc_count', value: gcs, unit: 'collections' });
  figures.push({ bench: 'daemon_thread_1m_heap_kept', value: after - before, unit: 'bytes' });
  return figures;
}
