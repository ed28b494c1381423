/**
 * What the daemon tells the exporter and the HTTP server about its own health. The CLI's daemon
 * implements DaemonHealth (or fills a HealthState); export and http only read it, at scrape time.
 */
import type { ObservableSink } from '../alerting/delivery-queue.js';
import { ALERT_KINDS, type AlertKind, type AlertState, type AlertTransition } from '../detect/alert.js';

/** Transition counts by `${kind}/${state}` (published states only: firing, resolved). */
export type TransitionKey = `${AlertKind}/${AlertState}`;

export interface DaemonHealth {
  /** True once the consumer joined its group and the state of its partitions is restored. */
  ready(): boolean;
  /** Why not ready, in words, for /readyz (e.g. "restoring state of 3 partitions"). */
  notReadyReason?(): string;
  /** Consumer lag in records by partition name "topic-N" (the last "-" separates the partition number). */
  lag(): ReadonlyMap<string, number>;
  /** Seconds since the last successful checkpoint, or null when checkpointing is off (no series then). */
  checkpointAgeSeconds(): number | null;
  checkpointFailures(): number;
  /** Wall-clock seconds spent processing batches since start (a counter). */
  processingSeconds(): number;
  /** Sinks whose delivery is watched (modewatch_sink_* by sink name). */
  sinks(): readonly ObservableSink[];
  /** Alert transitions published since start. */
  transitions(): ReadonlyMap<TransitionKey, number>;
}

/** Counts published alert transitions; hand `record` to the registry's onAlert (with the sinks' fan-out). */
export class TransitionCounter {
  private readonly counts = new Map<TransitionKey, number>();

  constructor() {
    // Pre-initialised so that rate() and increase() see every series from its first scrape.
    for (const k of ALERT_KINDS) {
      this.counts.set(`${k}/firing`, 0);
      this.counts.set(`${k}/resolved`, 0);
    }
  }

  record = (t: AlertTransition): void => {
    const key: TransitionKey = `${t.kind}/${t.state}`;
    this.counts.set(key, (this.counts.get(key) ?? 0) + 1);
  };

  snapshot(): ReadonlyMap<TransitionKey, number> {
    return this.counts;
  }
}

/**
 * A DaemonHealth with plain mutable fields: for replay, the demo and tests, or for a daemon that
 * prefers to assign values as they change rather than implement the interface.
 */
export class HealthState implements DaemonHealth {
  isReady = false;
  reason = 'starting';
  readonly lagByPartition = new Map<string, number>();
  /** Epoch ms of the last successful checkpoint; null when checkpointing is off. */
  lastCheckpointMs: number | null = null;
  /** Epoch ms from which the checkpoint age counts while no checkpoint has been written yet. */
  startedMs = Date.now();
  checkpointingEnabled = false;
  failures = 0;
  busySeconds = 0;
  readonly watchedSinks: ObservableSink[] = [];
  readonly transitionCounter = new TransitionCounter();
  /** Clock for the checkpoint age (injectable for tests). */
  now: () => number = Date.now;

  ready(): boolean {
    return this.isReady;
  }
  notReadyReason(): string {
    return this.reason;
  }
  lag(): ReadonlyMap<string, number> {
    return this.lagByPartition;
  }
  checkpointAgeSeconds(): number | null {
    if (!this.checkpointingEnabled) return null;
    return Math.max(0, (this.now() - (this.lastCheckpointMs ?? this.startedMs)) / 1000);
  }
  checkpointFailures(): number {
    return this.failures;
  }
  processingSeconds(): number {
    return this.busySeconds;
  }
  sinks(): readonly ObservableSink[] {
    return this.watchedSinks;
  }
  transitions(): ReadonlyMap<TransitionKey, number> {
    return this.transitionCounter.snapshot();
  }
}

/** Split a partition name "topic-N" into its topic and partition number (as Kafka client tools print them). */
export function splitPartitionName(name: string): { topic: string; partition: string } {
  const i = name.lastIndexOf('-');
  if (i <= 0 || !/^\d+$/.test(name.slice(i + 1))) return { topic: name, partition: '' };
  return { topic: name.slice(0, i), partition: name.slice(i + 1) };
}
