/**
 * Log sink: one structured log record per transition. The CLI passes its pino logger;
 * without one, records go as JSON lines to a writable stream (stdout by default).
 * Writing is synchronous hand-over to the logger, so there is no queue; the default
 * writer refuses (and counts as dropped) lines once the stream has buffered more than
 * `maxBufferedBytes`, so a stalled stdout cannot grow memory without bound.
 */
import type { Writable } from 'node:stream';
import type { AlertSink, AlertTransition } from '../detect/alert.js';
import type { ObservableSink, SinkStats } from './delivery-queue.js';
import type { InfoLogger } from './logger.js';

export interface LogSinkOptions {
  /** A structured logger (pino fits); when given, `stream` is not used. */
  logger?: InfoLogger;
  /** Where JSON lines go without a logger (default process.stdout). */
  stream?: Writable;
  /** Default writer's bound on bytes waiting in the stream (default 1 MiB). */
  maxBufferedBytes?: number;
  name?: string;
}

/** The default writer: `{"time":..., "msg":..., ...obj}` per line. */
export class JsonLineLogger implements InfoLogger {
  dropped = 0;
  constructor(
    private readonly stream: Writable,
    private readonly maxBufferedBytes = 1024 * 1024,
  ) {}

  info(obj: object, msg: string): void {
    if (this.stream.writableLength > this.maxBufferedBytes || this.stream.destroyed) {
      this.dropped++;
      return;
    }
    this.stream.write(`${JSON.stringify({ level: 'info', time: Date.now(), msg, ...obj })}\n`);
  }
}

export class LogSink implements AlertSink, ObservableSink {
  readonly name: string;
  private readonly logger: InfoLogger;
  private readonly lineLogger: JsonLineLogger | null;
  private delivered = 0;
  private failed = 0;

  constructor(options: LogSinkOptions = {}) {
    this.name = options.name ?? 'log';
    if (options.logger) {
      this.logger = options.logger;
      this.lineLogger = null;
    } else {
      this.lineLogger = new JsonLineLogger(options.stream ?? process.stdout, options.maxBufferedBytes);
      this.logger = this.lineLogger;
    }
  }

  publish(t: AlertTransition): void {
    const droppedBefore = this.lineLogger?.dropped ?? 0;
    try {
      this.logger.info({ alert: t }, `alert ${t.state}: ${t.stream} ${t.kind}: ${t.evidence.summary}`);
    } catch {
      this.failed++;
      return;
    }
    if ((this.lineLogger?.dropped ?? 0) === droppedBefore) this.delivered++;
  }

  stats(): SinkStats {
    return { delivered: this.delivered, failed: this.failed, dropped: this.lineLogger?.dropped ?? 0, queueLength: 0 };
  }

  async close(): Promise<void> {
    // Nothing queued here; the stream's owner flushes and closes it.
  }
}
