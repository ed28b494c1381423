/**
 * Kafka sink: produces each AlertTransition as JSON to an alerts topic, keyed by stream so
 * all transitions of one stream land on one partition, in order. The kafkajs Producer is
 * the caller's: connected before use, disconnected by the caller after close().
 */
import type { Producer } from 'kafkajs';
import type { AlertTransition } from '../detect/alert.js';
import { DeliveryQueue, type DeliveryOptions } from './delivery-queue.js';
import { QueuedSink } from './queued-sink.js';

export interface KafkaSinkOptions {
  producer: Producer;
  topic: string;
  name?: string;
  /** Records per produce request (default 100). */
  maxBatch?: number;
  delivery?: Omit<DeliveryOptions, 'name' | 'maxBatch'>;
}

export class KafkaSink extends QueuedSink {
  constructor(options: KafkaSinkOptions) {
    if (!options.topic) throw new TypeError('kafka alert sink: topic must be a non-empty string');
    const name = options.name ?? 'kafka';
    const { producer, topic } = options;
    const queue = new DeliveryQueue<AlertTransition>(
      (batch, signal) =>
        abortable(
          producer.send({
            topic,
            messages: batch.map((t) => ({
              key: t.stream,
              value: JSON.stringify(t),
              timestamp: String(t.ts),
              headers: { kind: t.kind, state: t.state },
            })),
          }),
          signal,
        ),
      { ...options.delivery, name, maxBatch: options.maxBatch ?? 100 },
    );
    super(name, queue);
  }
}

/** kafkajs takes no AbortSignal: stop waiting when the signal fires (the request may still land). */
function abortable(p: Promise<unknown>, signal: AbortSignal): Promise<void> {
  return new Promise((resolve, reject) => {
    if (signal.aborted) return reject(signal.reason);
    const onAbort = () => reject(signal.reason);
    signal.addEventListener('abort', onAbort, { once: true });
    p.then(
      () => {
        signal.removeEventListener('abort', onAbort);
        resolve();
      },
      (err: unknown) => {
        signal.removeEventListener('abort', onAbort);
        reject(err);
      },
    );
  });
}
