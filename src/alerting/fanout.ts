/**
 * One AlertSink that hands every transition to many. Each sink queues on its own, so a
 * slow or failing one never holds up another; a sink that throws from publish() (which
 * the contract forbids, but a bug may do) is counted and the others still get the transition.
 */
import type { AlertSink, AlertTransition } from '../detect/alert.js';
import type { ObservableSink, SinkStats } from './delivery-queue.js';

function isObservable(s: AlertSink): s is AlertSink & ObservableSink {
  return typeof (s as Partial<ObservableSink>).stats === 'function';
}

export class FanoutSink implements AlertSink {
  readonly name = 'fanout';
  /** publish() calls that threw, per sink name. */
  readonly publishErrors = new Map<string, number>();

  constructor(readonly sinks: readonly AlertSink[]) {
    const names = new Set<string>();
    for (const s of sinks) {
      if (names.has(s.name)) throw new TypeError(`two alert sinks are named "${s.name}": give each a distinct name`);
      names.add(s.name);
    }
  }

  publish(transition: AlertTransition): void {
    for (const sink of this.sinks) {
      try {
        sink.publish(transition);
      } catch {
        this.publishErrors.set(sink.name, (this.publishErrors.get(sink.name) ?? 0) + 1);
      }
    }
  }

  /** Per-sink stats for the exporter; a publish() that threw counts as a failure. */
  stats(): Map<string, SinkStats> {
    const out = new Map<string, SinkStats>();
    for (const sink of this.sinks) {
      const base: SinkStats = isObservable(sink)
        ? sink.stats()
        : { delivered: 0, failed: 0, dropped: 0, queueLength: 0 };
      out.set(sink.name, { ...base, failed: base.failed + (this.publishErrors.get(sink.name) ?? 0) });
    }
    return out;
  }

  async close(): Promise<void> {
    // Close all at once so their drain bounds overlap rather than add up.
    await Promise.allSettled(this.sinks.map((s) => s.close()));
  }
}
