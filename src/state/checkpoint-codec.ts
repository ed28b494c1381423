/**
 * What both checkpoint stores share: a checkpoint cut into per-partition pieces and put back together, and
 * checks of stored JSON that name the place (file, topic record) when something is wrong.
 *
 * The unit of a checkpoint is the source partition: its next offset, its counters and all streams that live
 * on it. A save replaces the saved partitions whole (a stream of a saved partition that is absent from the
 * save is deleted) and leaves partitions it does not mention as they were, so that several processes sharing
 * a consumer group can each save their own partitions.
 */
import type { Checkpoint, StreamSnapshot } from './store.js';

export interface PartitionState {
  partition: string;
  /** Next offset to read. */
  position: number;
  counters: Record<string, number>;
  /** Stream name -> serialized monitor state. */
  streams: Map<string, string>;
}

export function emptyCheckpoint(): Checkpoint {
  return { positions: {}, streams: [], counters: {} };
}

/** Cuts a checkpoint into partitions. Every partition named by a stream or counters must have a position. */
export function splitCheckpoint(cp: Checkpoint): Map<string, PartitionState> {
  const out = new Map<string, PartitionState>();
  for (const [partition, position] of Object.entries(cp.positions)) {
    if (!Number.isSafeInteger(position) || position < 0) {
      throw new Error(`checkpoint: position ${position} of partition ${partition} is not an offset`);
    }
    out.set(partition, { partition, position, counters: { ...(cp.counters[partition] ?? {}) }, streams: new Map() });
  }
  for (const partition of Object.keys(cp.counters)) {
    if (!out.has(partition)) throw new Error(`checkpoint: counters for partition ${partition}, which has no position`);
  }
  for (const s of cp.streams) {
    const p = out.get(s.partition);
    if (!p) throw new Error(`checkpoint: stream ${s.stream} is on partition ${s.partition}, which has no position`);
    if (p.streams.has(s.stream)) throw new Error(`checkpoint: stream ${s.stream} appears twice on partition ${s.partition}`);
    p.streams.set(s.stream, s.state);
  }
  return out;
}

/** Puts partitions back into one checkpoint; only those listed in `only` if given. Streams sorted for stable output. */
export function joinCheckpoint(parts: Iterable<PartitionState>, only?: string[]): Checkpoint {
  const want = only ? new Set(only) : null;
  const cp = emptyCheckpoint();
  const streams: StreamSnapshot[] = [];
  for (const p of parts) {
    if (want && !want.has(p.partition)) continue;
    cp.positions[p.partition] = p.position;
    cp.counters[p.partition] = { ...p.counters };
    for (const [stream, state] of p.streams) streams.push({ stream, partition: p.partition, state });
  }
  streams.sort((a, b) => (a.partition === b.partition ? cmp(a.stream, b.stream) : cmp(a.partition, b.partition)));
  cp.streams = streams;
  return cp;
}

function cmp(a: string, b: string): number {
  return a < b ? -1 : a > b ? 1 : 0;
}

// ------------------------------------------------------------------------------------------------ checks

export type Json = null | boolean | number | string | Json[] | { [k: string]: Json };

export function parseJson(text: string, where: string): Json {
  try {
    return JSON.parse(text) as Json;
  } catch (e) {
    throw new Error(`${where}: not valid JSON (${e instanceof Error ? e.message : String(e)})`);
  }
}

export function obj(v: Json | undefined, where: string): { [k: string]: Json } {
  if (v === null || typeof v !== 'object' || Array.isArray(v)) throw new Error(`${where}: expected an object`);
  return v;
}

export function str(v: Json | undefined, where: string): string {
  if (typeof v !== 'string') throw new Error(`${where}: expected a string`);
  return v;
}

export function int(v: Json | undefined, where: string): number {
  if (typeof v !== 'number' || !Number.isSafeInteger(v) || v < 0) throw new Error(`${where}: expected a non-negative integer`);
  return v;
}

export function counters(v: Json | undefined, where: string): Record<string, number> {
  const o = obj(v, where);
  const out: Record<string, number> = {};
  for (const [k, n] of Object.entries(o)) {
    if (typeof n !== 'number' || !Number.isFinite(n)) throw new Error(`${where}.${k}: expected a number`);
    out[k] = n;
  }
  return out;
}
