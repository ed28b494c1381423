/**
 * The directory checkpoint store: round trip, per-partition replacement, crash leftovers, corrupt files.
 * Crash states are made the way a crash leaves them (a temp file cut short; a complete partition file that
 * no manifest names), since a save's only atomic step is the rename of the manifest (rename(2), POSIX).
 */
import { mkdtemp, readdir, readFile, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { DirCheckpointStore } from '../src/state/dir-store.js';
import type { Checkpoint } from '../src/state/store.js';
import { SAMPLE_CHECKPOINT } from './support/checkpoint-fixture.js';

let dir: string;
beforeEach(async () => {
  dir = await mkdtemp(join(tmpdir(), 'modewatch-dirstore-'));
});
afterEach(async () => {
  await rm(dir, { recursive: true, force: true });
});

const cp1: Checkpoint = SAMPLE_CHECKPOINT;

describe('DirCheckpointStore', () => {
  it('loads an empty checkpoint from an empty or missing directory', async () => {
    expect(await new DirCheckpointStore(join(dir, 'nope')).load()).toEqual({ positions: {}, streams: [], counters: {} });
  });

  it('round-trips a checkpoint and filters by partition', async () => {
    const store = new DirCheckpointStore(dir);
    await store.save(cp1);
    const back = await new DirCheckpointStore(dir).load();
    expect(back).toEqual(cp1);
    const only1 = await store.load(['lat-1']);
    expect(only1).toEqual({ positions: { 'lat-1': 7 }, counters: { 'lat-1': { events: 7 } }, streams: [cp1.streams[2]] });
  });

  it('replaces saved partitions whole and keeps the others', async () => {
    const store = new DirCheckpointStore(dir);
    await store.save(cp1);
    await store.save({
      positions: { 'lat-0': 200 },
      counters: { 'lat-0': { events: 198 } },
      streams: [{ stream: 'checkout', partition: 'lat-0', state: '{"v":1,"k":3}' }],
    });
    const back = await store.load();
    expect(back.positions).toEqual({ 'lat-0': 200, 'lat-1': 7 });
    // 'search' was not in the save of lat-0: it no longer exists.
    expect(back.streams.map((s) => s.stream)).toEqual(['checkout', 'login']);
    expect(back.streams[0]!.state).toBe('{"v":1,"k":3}');
    // Old partition files are removed; one file per partition plus the manifest remain.
    expect((await readdir(dir)).sort()).toEqual(['checkpoint.json', 'part-lat-0-2.json', 'part-lat-1-1.json']);
  });

  it('survives a crash between writing and renaming: temp files and unnamed partition files are ignored, then cleaned', async () => {
    const store = new DirCheckpointStore(dir);
    await store.save(cp1);
    // A save of seq 2 that died: its partition file is complete but the manifest was never replaced,
    // and the manifest's temp file was cut short.
    const half = JSON.parse(await readFile(join(dir, 'part-lat-0-1.json'), 'utf8')) as { position: number };
    half.position = 999;
    await writeFile(join(dir, 'part-lat-0-2.json'), JSON.stringify(half));
    await writeFile(join(dir, '.checkpoint.json.tmp-4242-deadbeef'), '{"format":"modewatch-checkpoint-dir","vers');
    await writeFile(join(dir, '.part-lat-1-2.json.tmp-4242-cafe0000'), '');
    expect(await new DirCheckpointStore(dir).load()).toEqual(cp1);

    await store.save({ positions: { 'lat-1': 9 }, counters: {}, streams: [] });
    const files = await readdir(dir);
    expect(files.filter((f) => f.includes('.tmp-'))).toEqual([]);
    expect(files.sort()).toEqual(['checkpoint.json', 'part-lat-0-1.json', 'part-lat-1-2.json']);
    const back = await store.load();
    expect(back.positions).toEqual({ 'lat-0': 120, 'lat-1': 9 });
    expect(back.streams.map((s) => s.stream)).toEqual(['checkout', 'search']);
  });

  it('names the file when the manifest or a partition file is corrupt', async () => {
    const store = new DirCheckpointStore(dir);
    await store.save(cp1);
    await writeFile(join(dir, 'part-lat-1-1.json'), '{"format":"modewatch-checkpoint-partition","version":1,"partition":"lat-1","position":-3,"counters":{},"streams":{}}');
    await expect(store.load()).rejects.toThrow(/part-lat-1-1\.json.*\.position: expected a non-negative integer/);
    await expect(store.load(['lat-0'])).resolves.toMatchObject({ positions: { 'lat-0': 120 } });
    await writeFile(join(dir, 'checkpoint.json'), '{not json');
    await expect(store.load()).rejects.toThrow(new RegExp(`checkpoint manifest ${join(dir, 'checkpoint.json')}: not valid JSON`));
  });

  it('rejects a checkpoint whose stream sits on a partition without a position', async () => {
    const store = new DirCheckpointStore(dir);
    await expect(store.save({ positions: {}, counters: {}, streams: [{ stream: 'x', partition: 'p-0', state: '{}' }] })).rejects.toThrow(
      /stream x is on partition p-0, which has no position/,
    );
    expect(await readdir(dir)).toEqual([]);
  });
});
