/**
 * Webhook sink: POSTs each AlertTransition, as JSON, to one URL. A 2xx answer is delivered;
 * anything else goes through the shared retry/backoff rules (src/alerting/delivery-queue.ts).
 */
import type { AlertSink, AlertTransition } from '../detect/alert.js';
import { DeliveryQueue, type DeliveryOptions, type ObservableSink, type SinkStats } from './delivery-queue.js';
import { postJson } from './http-post.js';

export interface WebhookSinkOptions {
  url: string;
  /** Sent as `Authorization: Bearer <token>`; never logged. */
  bearerToken?: string;
  /** Sink name in metrics and logs (default "webhook"). */
  name?: string;
  delivery?: Omit<DeliveryOptions, 'name' | 'maxBatch'>;
}

export class WebhookSink implements AlertSink, ObservableSink {
  readonly name: string;
  private readonly queue: DeliveryQueue<AlertTransition>;

  constructor(options: WebhookSinkOptions) {
    const url = checkHttpUrl(options.url, 'webhook url');
    this.name = options.name ?? 'webhook';
    const headers: Record<string, string> = {};
    if (options.bearerToken) headers.authorization = `Bearer ${options.bearerToken}`;
    this.queue = new DeliveryQueue<AlertTransition>(
      async ([transition], signal) => postJson(url, transition, headers, signal),
      { ...options.delivery, name: this.name, maxBatch: 1 },
    );
  }

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

/** Accepts http(s) URLs only, with a message naming what was wrong. */
export function checkHttpUrl(url: string, what: string): string {
  let u: URL;
  try {
    u = new URL(url);
  } catch {
    throw new TypeError(`${what} is not a valid URL: ${JSON.stringify(url)}`);
  }
  if (u.protocol !== 'http:' && u.protocol !== 'https:') {
    throw new TypeError(`${what} must be http or https, got ${u.protocol}`);
  }
  return url;
}
