/**
 * Routes decoded events to their stream's monitor, creating monitors on first sight up to a cap,
 * and counts what it accepts and refuses. The one place where an event meets its stream: the
 * replay command, the daemon and the demo all feed it, so they all produce the same models and
 * alerts from the same records.
 */
import type { AlertTransition } from '../detect/alert.js';
import type { MonitorConfig } from '../detect/monitor-config.js';
import type { Monitor } from '../detect/monitor.js';
import { StreamMonitor, type MonitorState } from '../detect/stream-monitor.js';
import { VectorMonitorView } from '../detect/vector-monitor-view.js';
import { VectorStreamMonitor, type VectorMonitorState } from '../detect/vector-monitor.js';
import type { DecodeRejection, EventSlot } from '../ingest/event.js';
import type { ValueRejection } from '../math/reject.js';

/** Why an event was refused after decoding: bad value for its stream's scale, or the stream cap. */
export type RouteRejection = ValueRejection | 'stream_limit';
/** Every reason an input record can be refused, decoding included: the label values of the rejection counter. */
export type RejectionReason = DecodeRejection | RouteRejection;

export interface StreamSettings {
  monitor: MonitorConfig;
}

/** Settings for a stream, by name (from the configuration's stream rules). */
export type SettingsResolver = (stream: string) => StreamSettings;

export interface StreamEntry {
  readonly name: string;
  /** What everything downstream reads (exporter, API, page), whatever the stream carries. */
  readonly monitor: Monitor;
  /** The stream's monitor, by what its events carry (fixed by its first event). */
  readonly feed: { kind: 'number'; monitor: StreamMonitor } | { kind: 'vector'; monitor: VectorStreamMonitor };
  readonly settings: StreamSettings;
  /** Source partition the stream's events come from (for checkpoints). */
  partition: string;
  /** Events refused for this stream by reason (value rejections only; decode failures have no stream). */
  rejected: number;
  /** The most recent values (stream units), a ring for the histogram on the stream's page. */
  readonly recent: Float32Array;
  recentCount: number;
  /** The last alert transitions, newest last (bounded). */
  readonly history: AlertTransition[];
}

export interface RegistryOptions {
  maxStreams: number;
  resolve: SettingsResolver;
  /** Receives every firing/resolved transition (after it is added to the stream's history). */
  onAlert: (t: AlertTransition) => void;
  /** Values kept per stream for the histogram (0 keeps none). */
  recentValues?: number;
  /** Transitions kept per stream for the timeline. */
  historyLength?: number;
}

export class StreamRegistry {
  private readonly entries = new Map<string, StreamEntry>();
  private readonly opts: Required<RegistryOptions>;
  private lastName = '';
  private lastEntry: StreamEntry | null = null;
  /** Accepted events, all streams. */
  accepted = 0;
  /** Refusals by reason, decoding included (counted here so there is one counter). */
  readonly rejections = new Map<RejectionReason, number>();
  /** Events refused because the stream cap was reached. */
  refusedByCap = 0;

  constructor(options: RegistryOptions) {
    this.opts = { recentValues: 256, historyLength: 50, ...options };
  }

  get size(): number {
    return this.entries.size;
  }

  /** Count a record that failed to decode. */
  reject(reason: RejectionReason): void {
    this.rejections.set(reason, (this.rejections.get(reason) ?? 0) + 1);
  }

  /** Route one decoded event; returns a rejection reason (already counted) or null. */
  observe(slot: EventSlot): RouteRejection | null {
    let entry = slot.stream === this.lastName ? this.lastEntry : (this.entries.get(slot.stream) ?? null);
    if (entry === null) {
      if (this.entries.size >= this.opts.maxStreams) {
        this.refusedByCap++;
        this.reject('stream_limit');
        return 'stream_limit';
      }
      entry = this.create(slot.stream, slot.partition, slot.dim === 1 ? undefined : { kind: 'vector', state: null });
    }
    this.lastName = slot.stream;
    this.lastEntry = entry;
    const feed = entry.feed;
    let r: RouteRejection | null;
    if (feed.kind === 'number') r = slot.dim === 1 ? feed.monitor.observeEvent(slot) : 'wrong_dimension';
    else r = slot.dim === 1 ? 'wrong_dimension' : feed.monitor.observeEvent(slot);
    if (r !== null) {
      entry.rejected++;
      this.reject(r);
      return r;
    }
    this.accepted++;
    const n = entry.recent.length;
    if (n > 0) entry.recent[entry.recentCount++ % n] = slot.dim === 1 ? slot.value : slot.vector[0];
    return null;
  }

  get(name: string): StreamEntry | undefined {
    return this.entries.get(name);
  }

  streams(): IterableIterator<StreamEntry> {
    return this.entries.values();
  }

  /** Forget a stream (its metric series disappear with it). */
  remove(name: string): boolean {
    if (this.lastName === name) {
      this.lastName = '';
      this.lastEntry = null;
    }
    return this.entries.delete(name);
  }

  private create(name: string, partition: string, state?: SavedMonitor): StreamEntry {
    const settings = this.opts.resolve(name);
    const history: AlertTransition[] = [];
    const limit = this.opts.historyLength;
    const listener = (t: AlertTransition) => {
      history.push(t);
      if (history.length > limit) history.shift();
      this.opts.onAlert(t);
    };
    let feed: StreamEntry['feed'];
    let monitor: Monitor;
    if (state === undefined || state.kind === 'number') {
      const m = state === undefined ? new StreamMonitor(name, settings.monitor, listener) : StreamMonitor.importState(state.state, settings.monitor, listener);
      feed = { kind: 'number', monitor: m };
      monitor = m;
    } else {
      const m = state.state === null ? new VectorStreamMonitor(name, settings.monitor, listener) : VectorStreamMonitor.importState(state.state, settings.monitor, listener);
      feed = { kind: 'vector', monitor: m };
      monitor = new VectorMonitorView(m);
    }
    const entry: StreamEntry = {
      name,
      monitor,
      feed,
      settings,
      partition,
      rejected: 0,
      recent: new Float32Array(this.opts.recentValues),
      recentCount: 0,
      history,
    };
    this.entries.set(name, entry);
    return entry;
  }

  /** Snapshots of the streams on the given partitions (all if omitted). */
  snapshot(partitions?: ReadonlySet<string>): RegistrySnapshot[] {
    const out: RegistrySnapshot[] = [];
    for (const e of this.entries.values()) {
      if (partitions !== undefined && !partitions.has(e.partition)) continue;
      const monitor: SavedMonitor = e.feed.kind === 'number' ? { kind: 'number', state: e.feed.monitor.exportState() } : { kind: 'vector', state: e.feed.monitor.exportState() };
      out.push({ stream: e.name, partition: e.partition, monitor, rejected: e.rejected, history: e.history.slice() });
    }
    return out;
  }

  /** Restore streams from snapshots (replacing any with the same name). */
  restore(snapshots: readonly RegistrySnapshot[]): void {
    for (const s of snapshots) {
      this.remove(s.stream);
      const entry = this.create(s.stream, s.partition, s.monitor);
      entry.rejected = s.rejected;
      entry.history.push(...s.history);
    }
  }

  /** Drop every stream on these partitions (they were revoked and checkpointed). */
  dropPartitions(partitions: ReadonlySet<string>): void {
    for (const e of [...this.entries.values()]) if (partitions.has(e.partition)) this.remove(e.name);
  }
}

/** A monitor's saved state, by the kind of events its stream carries. */
export type SavedMonitor = { kind: 'number'; state: MonitorState } | { kind: 'vector'; state: VectorMonitorState | null };

export interface RegistrySnapshot {
  stream: string;
  partition: string;
  monitor: SavedMonitor;
  rejected: number;
  history: AlertTransition[];
}
