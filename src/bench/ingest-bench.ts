/**
 * Ingest throughput: line reading + NDJSON decoding of 1-D records from a temporary file of ~2 million lines
 * (written by the simulator, so the shape is what `modewatch simulate` produces). Also the decode rate alone,
 * over strings already in memory, to tell reading cost from decoding cost.
 */
import { mkdtemp, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { EventSlot } from '../ingest/event.js';
import { FileSource } from '../ingest/file-source.js';
import { readLineChunks } from '../ingest/line-reader.js';
import { NdjsonDecoder } from '../ingest/records.js';
import { simulate } from '../simulate/generator.js';
import { buildScenario } from '../simulate/suite.js';

export interface BenchResult {
  bench: string;
  value: number;
  unit: string;
}

export async function benchIngest(lines = 2_000_000): Promise<BenchResult[]> {
  const dir = await mkdtemp(join(tmpdir(), 'modewatch-ingest-bench-'));
  try {
    const file = join(dir, 'records.ndjson');
    const scenario = buildScenario('latency-stationary', { events: lines });
    const run = simulate(scenario, 7);
    const parts: string[] = [];
    let block: string[] = [];
    for (const r of run.records()) {
      block.push(r.line);
      if (block.length === 65536) {
        parts.push(block.join('\n') + '\n');
        block = [];
      }
    }
    if (block.length > 0) parts.push(block.join('\n') + '\n');
    await writeFile(file, parts.join(''));
    const sample = parts[0].split('\n').slice(0, 200_000);
    parts.length = 0;

    const results: BenchResult[] = [];
    // End to end: read + split + decode, best of 3 (the machine is shared).
    let best = 0;
    let total = 0;
    for (let rep = 0; rep < 3; rep++) {
      const dec = new NdjsonDecoder();
      const slot = new EventSlot();
      let accepted = 0;
      let sum = 0;
      const t0 = process.hrtime.bigint();
      for await (const c of readLineChunks(file)) {
        const text = c.text;
        for (let k = 0; k < c.count; k++) {
          const s = c.starts[k];
          if (s >= 0 && dec.decode(text, s, c.ends[k], slot) === null) {
            accepted++;
            sum += slot.value;
          }
        }
      }
      const secs = Number(process.hrtime.bigint() - t0) / 1e9;
      if (!(sum > 0)) throw new Error('decoded nothing');
      if (dec.fallbacks !== 0) throw new Error(`${dec.fallbacks} lines left the fast path`);
      total = accepted;
      best = Math.max(best, accepted / secs);
    }
    results.push({ bench: `ingest_read_decode_ndjson_1d (${total} lines)`, value: Math.round(best), unit: 'records/s' });

    // Through the Source contract: one RawRecord (and one string) per line, decoded by the source.
    {
      const src = new FileSource({ paths: [file] });
      const slot = new EventSlot();
      let accepted = 0;
      const t0 = process.hrtime.bigint();
      await src.start({
        onBatch: async (b) => {
          for (let i = 0; i < b.length; i++) if (src.decode(b.record(i), slot) === null) accepted++;
        },
        onAssigned: async () => new Map(),
        onRevoked: async () => undefined,
        onFatal: (e) => {
          throw e;
        },
      });
      await src.finished();
      const secs = Number(process.hrtime.bigint() - t0) / 1e9;
      results.push({ bench: 'ingest_file_source_records_ndjson_1d', value: Math.round(accepted / secs), unit: 'records/s' });
    }

    // Decode only, strings in memory.
    const dec = new NdjsonDecoder();
    const slot = new EventSlot();
    let bestDecode = 0;
    for (let rep = 0; rep < 3; rep++) {
      let n = 0;
      const t0 = process.hrtime.bigint();
      for (let k = 0; k < 5; k++) {
        for (const line of sample) if (line.length > 0 && dec.decode(line, 0, line.length, slot) === null) n++;
      }
      const secs = Number(process.hrtime.bigint() - t0) / 1e9;
      bestDecode = Math.max(bestDecode, n / secs);
    }
    results.push({ bench: 'ingest_decode_ndjson_1d_in_memory', value: Math.round(bestDecode), unit: 'records/s' });
    return results;
  } finally {
    await rm(dir, { recursive: true, force: true });
  }
}

if (import.meta.url === pathToFileURL(process.argv[1] ?? '').href) {
  const n = Number(process.argv[2] ?? 2_000_000);
  for (const r of await benchIngest(n)) console.log(`${r.bench}: ${r.value} ${r.unit}`);
}
