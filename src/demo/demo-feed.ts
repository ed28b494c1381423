/**
 * Plays a simulated scenario into the stream registry at a steady pace, the way the daemon would
 * receive it, with the first events fast-forwarded so the monitors are past warm-up when a person
 * starts watching. Records go through the same NDJSON decoder replay uses.
 */
import { EventSlot } from '../ingest/event.js';
import { NdjsonDecoder } from '../ingest/records.js';
import { simulate, type SimRecord } from '../simulate/generator.js';
import type { Scenario } from '../simulate/scenario.js';
import type { StreamRegistry } from '../streams/stream-registry.js';

export interface DemoFeedOptions {
  /** Records fed at once before pacing starts (across all streams). */
  fastForward: number;
  /** Records per second of wall time once paced (across all streams). */
  recordsPerSecond: number;
  seed: number;
  /** Called when the scenario has no more records. */
  onFinished?: () => void;
}

const TICK_MS = 100;

export class DemoFeed {
  private readonly records: Generator<SimRecord>;
  private readonly slot = new EventSlot();
  private readonly decoder = new NdjsonDecoder();
  private timer: NodeJS.Timeout | null = null;
  private credit = 0;
  fed = 0;
  finished = false;

  constructor(
    scenario: Scenario,
    private readonly registry: StreamRegistry,
    private readonly opts: DemoFeedOptions,
  ) {
    this.records = simulate(scenario, opts.seed).records();
    this.slot.partition = 'demo';
  }

  /** Feed the fast-forward part now, then keep feeding on a timer. */
  start(): void {
    this.feed(this.opts.fastForward);
    this.timer = setInterval(() => {
      this.credit += (this.opts.recordsPerSecond * TICK_MS) / 1000;
      const n = Math.floor(this.credit);
      this.credit -= n;
      this.feed(n);
    }, TICK_MS);
  }

  stop(): void {
    if (this.timer !== null) clearInterval(this.timer);
    this.timer = null;
  }

  /** Feed up to n records; returns how many were fed. */
  feed(n: number): number {
    let k = 0;
    for (; k < n; k++) {
      const r = this.records.next();
      if (r.done === true) {
        if (!this.finished) {
          this.finished = true;
          this.stop();
          this.opts.onFinished?.();
        }
        break;
      }
      const rec = r.value;
      this.slot.offset = rec.offset;
      const reason = this.decoder.decode(rec.line, 0, rec.line.length, this.slot);
      if (reason !== null) this.registry.reject(reason);
      else this.registry.observe(this.slot);
      this.fed++;
    }
    return k;
  }
}

/** The scenario with its streams starting so that the fast-forwarded events end about now. */
export function anchorToNow(scenario: Scenario, fastForwardPerStream: number, nowMs: number): Scenario {
  return {
    ...scenario,
    streams: scenario.streams.map((s) => ({ ...s, start: Math.round(nowMs - (1000 * fastForwardPerStream) / s.rate) })),
  };
}
