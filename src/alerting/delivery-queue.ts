/**
 * The delivery engine every network sink shares: a bounded in-memory queue drained by one
 * background worker, with retries and exponential backoff with jitter, and counters the
 * metrics exporter reads at scrape time.
 *
 * - push() never blocks and never throws: when the queue is full the OLDEST waiting item is
 *   dropped and counted (fresh alert state is worth more than stale).
 * - Items are delivered in order, up to `maxBatch` per call (Alertmanager and Kafka take batches).
 * - A failed attempt is retried up to `maxAttempts` in all, waiting an "equal jitter" backoff:
 *   half of min(maxDelay, base·2^(n-1)) plus a uniform random part of the other half (the
 *   schedule described in the AWS Architecture Blog, "Exponential Backoff and Jitter", 2015).
 *   Equal rather than full jitter keeps a floor under each wait, so a flapping receiver is
 *   never hammered.
 * - An error marked `retryable: false` (e.g. HTTP 400: the receiver will never accept it)
 *   fails the batch at once.
 * - close() stops accepting, drains what is queued, and gives up after `closeTimeoutMs`:
 *   the attempt in flight is aborted and whatever is left is counted as dropped.
 */
import type { WarnLogger } from './logger.js';
import { silentLogger } from './logger.js';

/** What the exporter reads per sink (modewatch_sink_* families in src/export/metric-names.ts). */
export interface SinkStats {
  /** Items handed over successfully (for a sink with several receivers: per receiver). */
  delivered: number;
  /** Items given up after the last attempt, or refused as not retryable. */
  failed: number;
  /** Items thrown away unsent: queue full, or still queued when close() ran out of time. */
  dropped: number;
  /** Items waiting or in flight now. */
  queueLength: number;
}

/** A sink whose delivery the exporter can watch. */
export interface ObservableSink {
  readonly name: string;
  stats(): SinkStats;
}

export interface DeliveryOptions {
  /** Used in log lines. */
  name: string;
  /** Most items waiting at once (default 1000). */
  capacity?: number;
  /** Most items handed to one deliver() call (default 1). */
  maxBatch?: number;
  /** Attempts per batch, first included (default 5). */
  maxAttempts?: number;
  /** Backoff before the second attempt, before jitter (default 500 ms). */
  baseDelayMs?: number;
  /** Largest backoff (default 30 s). */
  maxDelayMs?: number;
  /** Time one attempt may take before it is aborted (default 10 s). */
  attemptTimeoutMs?: number;
  /** How long close() may spend draining (default 5 s). */
  closeTimeoutMs?: number;
  /** Uniform [0,1) source for jitter; injectable so tests can pin it. */
  random?: () => number;
  log?: WarnLogger;
}

/** Deliver a batch or throw. Must give up promptly when `signal` aborts. */
export type Deliver<T> = (batch: T[], signal: AbortSignal) => Promise<void>;

/** An error that retrying cannot fix. */
export class PermanentDeliveryError extends Error {
  readonly retryable = false;
}

function isPermanent(err: unknown): boolean {
  return typeof err === 'object' && err !== null && (err as { retryable?: unknown }).retryable === false;
}

function errorText(err: unknown): string {
  if (err instanceof Error) return err.message;
  return String(err);
}

/** Equal-jitter backoff before attempt `attempt + 1` (attempt counts from 1). */
export function backoffDelay(attempt: number, baseMs: number, maxMs: number, u: number): number {
  const cap = Math.min(maxMs, baseMs * 2 ** (attempt - 1));
  return cap / 2 + (cap / 2) * u;
}

export class DeliveryQueue<T> {
  private readonly items: T[] = [];
  private inFlight = 0;
  private delivered = 0;
  private failed = 0;
  private dropped = 0;
  private closing = false;
  private wake: (() => void) | null = null;
  private readonly stop = new AbortController();
  private readonly worker: Promise<void>;
  private closed: Promise<void> | null = null;

  private readonly capacity: number;
  private readonly maxBatch: number;
  private readonly maxAttempts: number;
  private readonly baseDelayMs: number;
  private readonly maxDelayMs: number;
  private readonly attemptTimeoutMs: number;
  private readonly closeTimeoutMs: number;
  private readonly random: () => number;
  private readonly log: WarnLogger;

  constructor(
    private readonly deliver: Deliver<T>,
    private readonly options: DeliveryOptions,
  ) {
    this.capacity = positive(options.capacity ?? 1000, 'capacity');
    this.maxBatch = positive(options.maxBatch ?? 1, 'maxBatch');
    this.maxAttempts = positive(options.maxAttempts ?? 5, 'maxAttempts');
    this.baseDelayMs = nonNegative(options.baseDelayMs ?? 500, 'baseDelayMs');
    this.maxDelayMs = nonNegative(options.maxDelayMs ?? 30_000, 'maxDelayMs');
    this.attemptTimeoutMs = positive(options.attemptTimeoutMs ?? 10_000, 'attemptTimeoutMs');
    this.closeTimeoutMs = nonNegative(options.closeTimeoutMs ?? 5_000, 'closeTimeoutMs');
    this.random = options.random ?? Math.random;
    this.log = options.log ?? silentLogger;
    this.worker = this.run();
  }

  /** Queue an item; returns at once. */
  push(item: T): void {
    if (this.closing) {
      this.dropped++;
      return;
    }
    if (this.items.length >= this.capacity) {
      this.items.shift();
      this.dropped++;
    }
    this.items.push(item);
    this.wake?.();
  }

  stats(): SinkStats {
    return {
      delivered: this.delivered,
      failed: this.failed,
      dropped: this.dropped,
      queueLength: this.items.length + this.inFlight,
    };
  }

  /** Drain within closeTimeoutMs, then stop. Safe to call more than once. */
  close(): Promise<void> {
    if (this.closed) return this.closed;
    this.closing = true;
    this.wake?.();
    this.closed = (async () => {
      let timer: NodeJS.Timeout | undefined;
      const deadline = new Promise<void>((resolve) => {
        timer = setTimeout(() => {
          this.stop.abort();
          resolve();
        }, this.closeTimeoutMs);
      });
      await Promise.race([this.worker, deadline]);
      clearTimeout(timer);
      // After an abort the worker returns promptly: deliver() and sleeps honour the signal.
      await this.worker;
    })();
    return this.closed;
  }

  private async run(): Promise<void> {
    for (;;) {
      if (this.stop.signal.aborted) {
        this.dropped += this.items.length;
        this.items.length = 0;
        return;
      }
      if (this.items.length === 0) {
        if (this.closing) return;
        await new Promise<void>((resolve) => {
          this.wake = resolve;
        });
        this.wake = null;
        continue;
      }
      const batch = this.items.splice(0, this.maxBatch);
      this.inFlight = batch.length;
      const ok = await this.attempts(batch);
      this.inFlight = 0;
      if (ok) this.delivered += batch.length;
      else if (this.stop.signal.aborted) this.dropped += batch.length;
      else this.failed += batch.length;
    }
  }

  private async attempts(batch: T[]): Promise<boolean> {
    for (let attempt = 1; ; attempt++) {
      // One controller per attempt, aborted by its own timeout or by close(); listeners are
      // removed after each attempt so a long-lived daemon does not pile them up.
      const attemptCtl = new AbortController();
      const onStop = () => attemptCtl.abort(this.stop.signal.reason);
      this.stop.signal.addEventListener('abort', onStop, { once: true });
      const timer = setTimeout(
        () => attemptCtl.abort(new Error(`attempt timed out after ${this.attemptTimeoutMs} ms`)),
        this.attemptTimeoutMs,
      );
      try {
        await this.deliver(batch, attemptCtl.signal);
        return true;
      } catch (err) {
        if (this.stop.signal.aborted) return false;
        const last = attempt >= this.maxAttempts || isPermanent(err);
        this.log.warn(
          { sink: this.options.name, attempt, items: batch.length, error: errorText(err), givingUp: last },
          last ? 'alert delivery failed, giving up' : 'alert delivery failed, will retry',
        );
        if (last) return false;
      } finally {
        clearTimeout(timer);
        this.stop.signal.removeEventListener('abort', onStop);
      }
      const delay = backoffDelay(attempt, this.baseDelayMs, this.maxDelayMs, this.random());
      await sleep(delay, this.stop.signal);
      if (this.stop.signal.aborted) return false;
    }
  }
}

function sleep(ms: number, signal: AbortSignal): Promise<void> {
  return new Promise((resolve) => {
    if (signal.aborted) return resolve();
    const onAbort = () => {
      clearTimeout(timer);
      resolve();
    };
    const timer = setTimeout(() => {
      signal.removeEventListener('abort', onAbort);
      resolve();
    }, ms);
    signal.addEventListener('abort', onAbort, { once: true });
  });
}

function positive(v: number, key: string): number {
  if (!Number.isFinite(v) || v <= 0) throw new RangeError(`delivery option ${key} must be a positive number, got ${v}`);
  return v;
}

function nonNegative(v: number, key: string): number {
  if (!Number.isFinite(v) || v < 0) throw new RangeError(`delivery option ${key} must be >= 0, got ${v}`);
  return v;
}
