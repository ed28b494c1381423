/**
 * `modewatch replay FILE...`: runs recorded streams through the very pipeline the daemon runs
 * (decode -> stream registry -> monitors -> alert transitions), as fast as the files can be read.
 * Alert transitions go to stdout as NDJSON; a summary goes to stderr (or a JSON file).
 */
import { writeFile } from 'node:fs/promises';
import type { Writable } from 'node:stream';
import type { AlertTransition } from '../detect/alert.js';
import { DEFAULT_MONITOR_CONFIG, validateMonitorConfig, type MonitorConfig } from '../detect/monitor-config.js';
import { decodeFile } from '../ingest/file-source.js';
import type { RecordFormat } from '../ingest/records.js';
import type { ScaleName } from '../math/scale.js';
import { StreamRegistry, type SettingsResolver } from '../streams/stream-registry.js';

export interface ReplayOptions {
  files: string[];
  /** Per-stream settings (from --config); defaults otherwise. */
  resolve?: SettingsResolver;
  /** Default scale of every stream (overridden by the config's rules). */
  scale?: ScaleName | 'auto';
  format?: RecordFormat;
  maxStreams?: number;
  /** Called after each chunk read with the characters (bytes, for ASCII files) read so far over all files. */
  onProgress?: (bytesRead: number) => void;
}

export interface ReplaySummary {
  files: string[];
  records: number;
  accepted: number;
  rejected: Record<string, number>;
  streams: number;
  alerts: { firing: number; resolved: number };
  seconds: number;
  recordsPerSecond: number;
  finalComponents: Record<
    string,
    {
      scale: string;
      state: string;
      events: number;
      reference: { id: number; weight: number; location: number; spread: number }[];
      current: { id: number; weight: number; location: number; spread: number }[];
    }
  >;
}

/** One alert transition as replay prints it: flat, with its evidence. */
export function transitionRecord(t: AlertTransition, file?: string): Record<string, unknown> {
  const e = t.evidence;
  return {
    offset: t.offset,
    ts: t.ts,
    time: isoTime(t.ts),
    ...(file !== undefined ? { file } : {}),
    stream: t.stream,
    kind: t.kind,
    state: t.state,
    componentId: e.componentId,
    statistic: e.statistic,
    value: round(e.value),
    threshold: e.threshold,
    startsAt: isoTime(t.startsAt),
    endsAt: t.endsAt === null ? null : isoTime(t.endsAt),
    resolution: t.resolution,
    firstEvidenceOffset: e.firstEvidenceOffset,
    firstEvidenceTime: isoTime(e.firstEvidenceTs),
    summary: e.summary,
    before: e.before,
    after: e.after,
  };
}

function isoTime(ms: number): string | number {
  const d = new Date(ms);
  return Number.isNaN(d.getTime()) ? ms : d.toISOString();
}

function round(x: number): number {
  return Math.round(x * 1000) / 1000;
}

export function defaultResolver(scale: ScaleName | 'auto' = DEFAULT_MONITOR_CONFIG.scale): SettingsResolver {
  const monitor: MonitorConfig = { ...DEFAULT_MONITOR_CONFIG, scale };
  const problems = validateMonitorConfig(monitor);
  if (problems.length > 0) throw new Error(problems.map((p) => `${p.key}: ${p.message}`).join('; '));
  return () => ({ monitor });
}

/** Replays the files in order; returns the summary. Transitions are written to `out` as they happen. */
export async function runReplay(opts: ReplayOptions, out: Writable): Promise<ReplaySummary> {
  const started = process.hrtime.bigint();
  let currentFile = '';
  let firing = 0;
  let resolved = 0;
  const multi = opts.files.length > 1;
  let pendingText = '';
  const registry = new StreamRegistry({
    maxStreams: opts.maxStreams ?? 100_000,
    resolve: opts.resolve ?? defaultResolver(opts.scale),
    recentValues: 0,
    onAlert: (t) => {
      if (t.state === 'firing') firing++;
      else if (t.state === 'resolved') resolved++;
      pendingText += JSON.stringify(transitionRecord(t, multi ? currentFile : undefined)) + '\n';
    },
  });
  let base = 0;
  let records = 0;
  let bytesDone = 0;
  for (let i = 0; i < opts.files.length; i++) {
    currentFile = opts.files[i];
    const lineBase = base;
    const bytesBase = bytesDone;
    const counts = await decodeFile(
      currentFile,
      i,
      (slot) => {
        slot.offset += lineBase;
        registry.observe(slot);
        if (pendingText.length > 0) flush();
      },
      (reason) => registry.reject(reason),
      {
        format: opts.format,
        onChunk: (chars) => {
          bytesDone = bytesBase + chars;
          opts.onProgress?.(bytesDone);
        },
      },
    );
    base += counts.lines;
    records += counts.lines;
  }
  flush();

  function flush(): void {
    if (pendingText.length === 0) return;
    out.write(pendingText);
    pendingText = '';
  }

  const seconds = Number(process.hrtime.bigint() - started) / 1e9;
  const finalComponents: ReplaySummary['finalComponents'] = {};
  const strip = (v: { id: number; weight: number; location: number; spread: number }) => ({ id: v.id, weight: v.weight, location: v.location, spread: v.spread });
  for (const e of registry.streams()) {
    const m = e.monitor;
    finalComponents[e.name] = {
      scale: m.scale,
      state: m.state,
      events: m.eventsAccepted,
      reference: m.views(m.reference).map(strip),
      current: m.views(m.current).map(strip),
    };
  }
  return {
    files: opts.files,
    records,
    accepted: registry.accepted,
    rejected: Object.fromEntries([...registry.rejections.entries()].sort()),
    streams: registry.size,
    alerts: { firing, resolved },
    seconds,
    recordsPerSecond: seconds > 0 ? records / seconds : 0,
    finalComponents,
  };
}

export async function writeSummary(summary: ReplaySummary, path: string | undefined, err: Writable): Promise<void> {
  if (path !== undefined) {
    await writeFile(path, JSON.stringify(summary, null, 2) + '\n');
    return;
  }
  const rej = Object.entries(summary.rejected);
  err.write(
    `replayed ${summary.records} records from ${summary.files.length} file(s) in ${summary.seconds.toFixed(2)} s ` +
      `(${Math.round(summary.recordsPerSecond)} records/s): ${summary.accepted} accepted, ` +
      `${rej.length === 0 ? 'none rejected' : 'rejected ' + rej.map(([k, v]) => `${k}=${v}`).join(', ')}; ` +
      `${summary.streams} stream(s); ${summary.alerts.firing} alert(s) fired, ${summary.alerts.resolved} resolved\n`,
  );
  for (const [name, s] of Object.entries(summary.finalComponents)) {
    err.write(`  ${name} (${s.scale}, ${s.state}, ${s.events} events): ` + s.current.map((c) => `#${c.id} ${(100 * c.weight).toFixed(1)}% at ${c.location.toPrecision(4)} ± ${c.spread.toPrecision(3)}`).join('; ') + '\n');
  }
}
