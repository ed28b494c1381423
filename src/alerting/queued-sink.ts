/**
 * A sink whose transitions go through a DeliveryQueue: publishing, statistics and closing are the queue's; a
 * concrete sink gives only its name and how one batch is delivered.
 */
import type { AlertSink, AlertTransition } from '../detect/alert.js';
import type { DeliveryQueue, ObservableSink, SinkStats } from './delivery-queue.js';

export class QueuedSink implements AlertSink, ObservableSink {
  constructor(
    readonly name: string,
    private readonly queue: DeliveryQueue<AlertTransition>,
  ) {}

  publish(transition: AlertTransition): void {
    this.queue.push(transition);
  }

  stats(): SinkStats {
    return this.queue.stats();
  }

  close(): Promise<void> {
    return this.queue.close();
  }
}
