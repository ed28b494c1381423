/**
 * Checkpoints in a local directory, for one process (several processes sharing a consumer group use the
 * Kafka store).
 *
 * Layout: one file per source partition, `part-<partition>-<seq>.json`, and a manifest `checkpoint.json` that
 * names the current file of every partition. A save writes the saved partitions' new files, then replaces the
 * manifest; the manifest replacement is the single atomic step, so a load sees either the whole save or none
 * of it. Every file is written the POSIX way for a crash-safe replace: write a temp file, fsync it, rename it
 * over the target, fsync the directory (rename(2) is atomic; the directory fsync makes the rename durable).
 * Leftovers of a crash (temp files, partition files no manifest names) are ignored by load and removed by
 * the next save.
 */
import { constants } from 'node:fs';
import { mkdir, open, readdir, readFile, rename, rm } from 'node:fs/promises';
import { join } from 'node:path';
import { randomBytes } from 'node:crypto';
import type { Checkpoint, CheckpointStore } from './store.js';
import { counters, emptyCheckpoint, int, joinCheckpoint, obj, parseJson, splitCheckpoint, str, type PartitionState } from './checkpoint-codec.js';

const MANIFEST = 'checkpoint.json';
const MANIFEST_FORMAT = 'modewatch-checkpoint-dir';
const PART_FORMAT = 'modewatch-checkpoint-partition';
const TEMP_MARK = '.tmp-';

interface Manifest {
  seq: number;
  /** partition -> file name */
  partitions: Map<string, string>;
}

export class DirCheckpointStore implements CheckpointStore {
  readonly name: string;

  constructor(private readonly dir: string) {
    this.name = `dir:${dir}`;
  }

  async load(partitions?: string[]): Promise<Checkpoint> {
    const manifest = await this.readManifest();
    if (!manifest) return emptyCheckpoint();
    const parts: PartitionState[] = [];
    for (const [partition, file] of manifest.partitions) {
      if (partitions && !partitions.includes(partition)) continue;
      parts.push(await this.readPartition(file, partition));
    }
    return joinCheckpoint(parts);
  }

  async save(checkpoint: Checkpoint): Promise<void> {
    const parts = splitCheckpoint(checkpoint);
    await mkdir(this.dir, { recursive: true });
    const old = (await this.readManifest()) ?? { seq: 0, partitions: new Map<string, string>() };
    const seq = old.seq + 1;
    const next = new Map(old.partitions);
    for (const p of parts.values()) {
      const file = `part-${encodeURIComponent(p.partition)}-${seq}.json`;
      const streams: Record<string, string> = {};
      for (const [s, state] of p.streams) streams[s] = state;
      const body = { format: PART_FORMAT, version: 1, partition: p.partition, position: p.position, counters: p.counters, streams };
      await this.writeFile(file, JSON.stringify(body), false);
      next.set(p.partition, file);
    }
    // Partition files durable before the manifest that names them.
    if (parts.size > 0) await this.syncDir();
    const partitions: Record<string, string> = {};
    for (const [p, f] of next) partitions[p] = f;
    // The atomic step: before it the old checkpoint is what loads, after it the new one.
    await this.writeFile(MANIFEST, JSON.stringify({ format: MANIFEST_FORMAT, version: 1, seq, partitions }, null, 1), true);
    await this.removeLeftovers(new Set(next.values()));
  }

  async close(): Promise<void> {}

  // --------------------------------------------------------------------------------------------- internals

  private async readManifest(): Promise<Manifest | null> {
    const path = join(this.dir, MANIFEST);
    let text: string;
    try {
      text = await readFile(path, 'utf8');
    } catch (e) {
      if ((e as NodeJS.ErrnoException).code === 'ENOENT') return null;
      throw new Error(`checkpoint manifest ${path}: ${(e as Error).message}`);
    }
    const where = `checkpoint manifest ${path}`;
    const m = obj(parseJson(text, where), where);
    if (m.format !== MANIFEST_FORMAT) throw new Error(`${where}: not a modewatch checkpoint manifest (format ${JSON.stringify(m.format)})`);
    if (m.version !== 1) throw new Error(`${where}: unsupported version ${JSON.stringify(m.version)}`);
    const partitions = new Map<string, string>();
    for (const [p, f] of Object.entries(obj(m.partitions, `${where} .partitions`))) {
      const file = str(f, `${where} .partitions.${p}`);
      if (file.includes('/') || file.startsWith('.')) throw new Error(`${where}: bad file name ${JSON.stringify(file)}`);
      partitions.set(p, file);
    }
    return { seq: int(m.seq, `${where} .seq`), partitions };
  }

  private async readPartition(file: string, partition: string): Promise<PartitionState> {
    const path = join(this.dir, file);
    const where = `checkpoint file ${path}`;
    let text: string;
    try {
      text = await readFile(path, 'utf8');
    } catch (e) {
      throw new Error(`${where} (named by ${MANIFEST} for partition ${partition}): ${(e as Error).message}`);
    }
    const o = obj(parseJson(text, where), where);
    if (o.format !== PART_FORMAT || o.version !== 1) throw new Error(`${where}: not a version 1 modewatch checkpoint partition file`);
    if (str(o.partition, `${where} .partition`) !== partition) throw new Error(`${where}: holds partition ${String(o.partition)}, expected ${partition}`);
    const streams = new Map<string, string>();
    for (const [s, state] of Object.entries(obj(o.streams, `${where} .streams`))) streams.set(s, str(state, `${where} .streams.${s}`));
    return { partition, position: int(o.position, `${where} .position`), counters: counters(o.counters, `${where} .counters`), streams };
  }

  /** Temp file, fsync, rename over the target; fsync of the directory when `durable` (once per save is enough). */
  private async writeFile(name: string, text: string, durable: boolean): Promise<void> {
    const tmp = join(this.dir, `.${name}${TEMP_MARK}${process.pid}-${randomBytes(4).toString('hex')}`);
    const fh = await open(tmp, constants.O_WRONLY | constants.O_CREAT | constants.O_EXCL, 0o644);
    try {
      await fh.writeFile(text, 'utf8');
      await fh.sync();
    } finally {
      await fh.close();
    }
    await rename(tmp, join(this.dir, name));
    if (durable) await this.syncDir();
  }

  private async syncDir(): Promise<void> {
    const dh = await open(this.dir, constants.O_RDONLY);
    try {
      await dh.sync();
    } finally {
      await dh.close();
    }
  }

  private async removeLeftovers(keep: Set<string>): Promise<void> {
    for (const f of await readdir(this.dir)) {
      const stale = (f.startsWith('part-') && f.endsWith('.json') && !keep.has(f)) || (f.startsWith('.') && f.includes(TEMP_MARK));
      if (stale) await rm(join(this.dir, f), { force: true });
    }
  }
}
